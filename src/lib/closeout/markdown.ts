/**
 * The report as Markdown (the download and the mail attachment) and the short plain-text bulletin
 * a coordinator sends to the community, both from the same numbers as the page.
 */
import type { EventReport } from './report.ts';
import { duration, exposure, num, pct, signedMag, utc } from './format.ts';

/** Escape the characters that would break a Markdown table cell or start markup. */
function cell(s: string): string {
	return s.replace(/\\/g, '\\\\').replace(/\|/g, '\\|').replace(/\r?\n/g, ' ');
}

function table(head: string[], rows: string[][]): string[] {
	if (rows.length === 0) return ['(none)'];
	return [`| ${head.join(' | ')} |`, `|${head.map(() => ' --- ').join('|')}|`, ...rows.map((r) => `| ${r.map(cell).join(' | ')} |`)];
}

export function reportMarkdown(r: EventReport): string {
	const e = r.event;
	const c = r.coverage;
	const out: string[] = [];
	out.push(`# Event record: ${e.sourceEventId}`, '');
	out.push(`Generated ${utc(r.generatedAt)} from the stored rows. State: ${e.state}${e.closedAt ? ` (closed ${utc(e.closedAt)})` : ''}.`, '');
	if (r.annotation) {
		out.push('## Coordinator’s note', '', ...r.annotation.text.split(/\r?\n/).map((l) => `> ${l}`), '');
		out.push(`— ${r.annotation.updatedBy ?? 'unknown'}, ${utc(r.annotation.updatedAt)}`, '');
	}
	out.push('## Times', '');
	out.push(
		...table(
			['Moment', 'Time', 'After merger'],
			[
				['Merger', utc(r.times.merger), '—'],
				['First notice received', utc(r.times.firstNoticeReceived), duration(r.delaysS.firstNoticeReceived)],
				['Acknowledged by duty', utc(r.times.acknowledged), duration(r.delaysS.acknowledged)],
				['First observation', utc(r.times.firstObservation), duration(r.delaysS.firstObservation)]
			]
		),
		''
	);
	if (r.delaysS.acknowledgedAfterNotice !== null) out.push(`Acknowledged ${duration(r.delaysS.acknowledgedAfterNotice)} after the first notice arrived.`, '');
	out.push('## Notices received', '');
	out.push(...table(['Kind', 'Role', 'Issued', 'Received'], r.notices.map((n) => [n.kind, n.role, utc(n.authoredAt), utc(n.receivedAt)])), '');
	out.push('## Final sky map', '');
	out.push(
		`- 50% credible area: ${num(e.area50Deg2)} deg²`,
		`- 90% credible area: ${num(e.area90Deg2)} deg²`,
		`- Distance: ${e.distanceMeanMpc === null ? '—' : `${num(e.distanceMeanMpc, 0)} ± ${num(e.distanceStdMpc, 0)} Mpc`}`,
		''
	);
	out.push('## Coverage', '');
	out.push(
		`- Sky probability covered (union of footprints, each piece of sky once): **${pct(c.sky)}**` +
			(c.errorBound !== null && c.errorBound > 0 ? ` (pixelisation bound ±${pct(c.errorBound, 2)})` : ''),
		`- Adding each footprint's own probability would claim ${pct(c.sumOfFootprints)} (overlaps counted again).`,
		`- Ranked galaxy probability inside observed footprints: **${pct(c.galaxies)}** (${c.galaxiesRanked} galaxies ranked)`,
		''
	);
	out.push('### By team', '', ...table(['Team', 'Observations', 'Sky', 'Galaxies'], c.byTeam.map((t) => [t.team, String(t.observations), pct(t.sky), pct(t.galaxies)])), '');
	out.push('### By filter', '', ...table(['Filter', 'Observations', 'Sky', 'Galaxies'], c.byFilter.map((f) => [f.filter, String(f.observations), pct(f.sky), pct(f.galaxies)])), '');
	out.push(
		'### Coverage against time',
		'',
		...table(
			['Hours after merger', 'Sky', 'Galaxies'],
			c.curve.map((p) => [p.hoursSinceMerger === null ? utc(p.at) : p.hoursSinceMerger.toFixed(2), pct(p.sky), pct(p.galaxies)])
		),
		''
	);
	out.push('## Telescopes and depth', '');
	if (r.kilonova) {
		out.push(
			`Expected peak of an ${r.kilonova.model} at ${num(r.kilonova.distanceMpc, 0)} Mpc: m ≈ ${num(r.kilonova.expectedMag)}` +
				(r.kilonova.expectedMagFar !== null ? ` (${num(r.kilonova.expectedMagFar)} at ${num(r.kilonova.farDistanceMpc, 0)} Mpc).` : '.'),
			`Model: ${r.kilonova.source} Margin = median limiting magnitude − expected magnitude; positive means deep enough.`,
			''
		);
	} else out.push('No distance estimate: depth is not compared with a kilonova.', '');
	const rows = r.telescopes.flatMap((t) =>
		t.filters.map((f) => [t.telescope, t.team, f.filter, String(f.observations), exposure(f.exposureS), num(f.medianLimitingMag), num(f.deepestLimitingMag), signedMag(f.marginMag)])
	);
	out.push(...table(['Telescope', 'Team', 'Filter', 'Pointings', 'Exposure', 'Median limit', 'Deepest limit', 'Margin'], rows), '');
	out.push('## Candidates', '');
	out.push(
		...table(
			['Name', 'Discovered', 'Mag', 'Team', 'State', 'Vetting', 'Credible level', 'Photometry', 'Classification'],
			r.candidates.map((k) => [
				k.name,
				utc(k.discoveredAt),
				`${num(k.discoveryMag, 2)} ${k.discoveryFilter}`,
				k.team,
				k.state,
				k.vetting.verdict ?? 'not vetted',
				pct(k.vetting.credibleLevel),
				`${k.photometry.detections} det., ${k.photometry.upperLimits} limits` +
					k.photometry.filters
						.filter((f) => f.rateMagPerDay !== null)
						.map((f) => `; ${f.filter} ${signedRate(f.rateMagPerDay!)} mag/d`)
						.join(''),
				k.classification.text.replace(/\.$/, '')
			])
		),
		''
	);
	out.push('## Counts', '', `Notices ${r.counts.notices} · observations ${r.counts.observations} · candidates ${r.counts.candidates} · classifications ${r.counts.classifications}`, '');
	out.push('## Participants', '');
	out.push(...table(['Team', 'Did'], r.participants.teams.map((t) => [t.name, t.deeds.join(', ')])), '');
	out.push(...table(['Person', 'Did'], r.participants.people.map((p) => [p.name, p.deeds.join(', ')])), '');
	return out.join('\n');
}

function signedRate(x: number): string {
	return `${x >= 0 ? '+' : '−'}${Math.abs(x).toFixed(2)}`;
}

/**
 * A short plain-text bulletin for the wider community in our own words: what was covered, how
 * deep, what was found. The coordinator reads and edits it before sending it anywhere.
 */
export function bulletinText(r: EventReport, collaboration = 'The Strainline collaboration'): string {
	const e = r.event;
	const lines: string[] = [];
	lines.push(`${e.sourceEventId}: optical/infrared follow-up summary`, '');
	const teams = r.participants.teams.length;
	const telescopes = r.telescopes.length;
	lines.push(
		`${collaboration} followed up ${e.sourceEventId}` +
			(r.times.merger ? ` (merger at ${utc(r.times.merger)})` : '') +
			` with ${telescopes} telescope${telescopes === 1 ? '' : 's'} from ${teams} team${teams === 1 ? '' : 's'}.`
	);
	if (r.delaysS.firstObservation !== null) lines.push(`The first image was taken ${duration(r.delaysS.firstObservation)} after the merger.`);
	lines.push(
		`Our ${r.counts.observations} pointings cover ${pct(r.coverage.sky)} of the probability of the final sky map` +
			(e.area90Deg2 !== null ? ` (90% credible area ${num(e.area90Deg2, 0)} deg²)` : '') +
			(r.coverage.galaxies !== null ? ` and ${pct(r.coverage.galaxies)} of the ranked galaxy probability` : '') +
			'.'
	);
	const filters = r.coverage.byFilter.map((f) => f.filter).join(', ');
	if (filters) lines.push(`Filters used: ${filters}.`);
	const limits = r.telescopes.flatMap((t) => t.filters.map((f) => f.medianLimitingMag));
	if (limits.length) {
		const lo = num(Math.min(...limits));
		const hi = num(Math.max(...limits));
		lines.push(
			(lo === hi ? `The median limiting magnitude was ${lo}` : `Median limiting magnitudes ranged from ${lo} to ${hi}`) +
				(r.kilonova ? `, against about ${num(r.kilonova.expectedMag)} expected for an ${r.kilonova.model} at ${num(r.kilonova.distanceMpc, 0)} Mpc.` : '.')
		);
	}
	if (r.candidates.length === 0) lines.push('No candidate counterparts were reported.');
	else {
		lines.push(`${r.candidates.length} candidate${r.candidates.length === 1 ? ' was' : 's were'} reported:`);
		for (const k of r.candidates) {
			lines.push(`  ${k.name} at RA ${k.raDeg.toFixed(4)}, Dec ${k.decDeg >= 0 ? '+' : '−'}${Math.abs(k.decDeg).toFixed(4)} (${num(k.discoveryMag, 1)} mag, ${k.discoveryFilter}): ${k.classification.status === 'none' ? 'not classified' : k.classification.text.replace(/\.$/, '')}.`);
		}
	}
	if (r.annotation) lines.push('', r.annotation.text);
	return lines.join('\n');
}
