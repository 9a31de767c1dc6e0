/** `--lat -29.2` → `--lat=-29.2`: node's parser would read the negative number as a flag. */
export function joinNegativeValues(args: string[]): string[] {
	const out: string[] = [];
	for (let i = 0; i < args.length; i++) {
		const a = args[i];
		const next = args[i + 1];
		if (/^--[a-z][\w-]*$/i.test(a) && next !== undefined && /^-(\d|\.\d)/.test(next)) {
			out.push(`${a}=${next}`);
			i++;
		} else out.push(a);
	}
	return out;
}
