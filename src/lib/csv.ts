/**
 * Split one CSV line into trimmed cells (RFC 4180 double-quote rules, no embedded newlines).
 * Returns null when a quote is left open. Used by the browser (header preview) and the server.
 */
export function splitCsvLine(line: string): string[] | null {
	const out: string[] = [];
	let cur = '';
	let quoted = false;
	for (let i = 0; i < line.length; i++) {
		const ch = line[i];
		if (quoted) {
			if (ch === '"' && line[i + 1] === '"') {
				cur += '"';
				i++;
			} else if (ch === '"') quoted = false;
			else cur += ch;
		} else if (ch === '"' && cur.trim() === '') {
			quoted = true;
			cur = '';
		} else if (ch === ',') {
			out.push(cur.trim());
			cur = '';
		} else cur += ch;
	}
	if (quoted) return null;
	out.push(cur.trim());
	return out;
}
