/**
 * VOEvent 2.0 notices as the fake broker writes them, with the Param names documented in
 * docs/notice-format.md (the names src/lib/alerts/voevent.ts reads first).
 */

export interface NoticeContent {
	ivorn: string;
	role: 'observation' | 'test' | 'utility';
	authoredAt: string;
	eventTime: string | null;
	sourceEventId: string;
	kind: 'preliminary' | 'initial' | 'update' | 'retraction';
	farHz: number | null;
	classification: { BNS: number; NSBH: number; BBH: number; Terrestrial: number } | null;
	properties: { HasNS: number; HasRemnant: number; HasMassGap: number } | null;
	skymapUrl: string | null;
	citations: { ivorn: string; cite: 'followup' | 'supersedes' | 'retraction' }[];
	description?: string;
}

export const BROKER_IVORN = 'ivo://strainline.example/fake-broker';

function esc(s: string): string {
	return s.replace(/[<>&"']/g, (c) => ({ '<': '&lt;', '>': '&gt;', '&': '&amp;', '"': '&quot;', "'": '&apos;' })[c]!);
}

/** XML date-time without the trailing Z, as VOEvent authors commonly write UTC (common practice). */
function voeTime(iso: string): string {
	return iso.replace(/Z$/, '');
}

function param(name: string, value: string | number, extra = ''): string {
	return `<Param name="${name}" value="${esc(String(value))}"${extra}/>`;
}

export function buildNoticeXml(n: NoticeContent): string {
	const what: string[] = [
		param('SourceEventId', n.sourceEventId, ' dataType="string" ucd="meta.id"'),
		param('NoticeKind', n.kind, ' dataType="string" ucd="meta.code"')
	];
	if (n.farHz !== null) what.push(param('FalseAlarmRate', n.farHz, ' dataType="float" unit="Hz" ucd="arith.rate;stat.falsealarm"'));
	if (n.skymapUrl) {
		what.push(`<Group type="Skymap" name="Skymap">${param('SkymapUrl', n.skymapUrl, ' dataType="string" ucd="meta.ref.url"')}</Group>`);
	}
	if (n.classification) {
		const c = n.classification;
		what.push(
			`<Group type="Classification" name="Classification">` +
				(['BNS', 'NSBH', 'BBH', 'Terrestrial'] as const)
					.map((k) => param(k, c[k], ' dataType="float" ucd="stat.probability"'))
					.join('') +
				`</Group>`
		);
	}
	if (n.properties) {
		const p = n.properties;
		what.push(
			`<Group type="Properties" name="Properties">` +
				(['HasNS', 'HasRemnant', 'HasMassGap'] as const)
					.map((k) => param(k, p[k], ' dataType="float" ucd="stat.probability"'))
					.join('') +
				`</Group>`
		);
	}
	const lines = [
		`<?xml version="1.0" encoding="UTF-8"?>`,
		`<voe:VOEvent xmlns:voe="http://www.ivoa.net/xml/VOEvent/v2.0" version="2.0" role="${n.role}" ivorn="${esc(n.ivorn)}">`,
		`  <Who><AuthorIVORN>${BROKER_IVORN}</AuthorIVORN><Date>${voeTime(n.authoredAt)}</Date></Who>`,
		`  <What>`,
		...what.map((w) => `    ${w}`),
		`  </What>`
	];
	if (n.eventTime) {
		lines.push(
			`  <WhereWhen><ObsDataLocation><ObservatoryLocation id="GEOLUN"/><ObservationLocation>` +
				`<AstroCoordSystem id="UTC-FK5-GEO"/><AstroCoords coord_system_id="UTC-FK5-GEO">` +
				`<Time unit="s"><TimeInstant><ISOTime>${voeTime(n.eventTime)}</ISOTime></TimeInstant></Time>` +
				`</AstroCoords></ObservationLocation></ObsDataLocation></WhereWhen>`
		);
	}
	lines.push(`  <How><Description>Invented demonstration notice from the Strainline fake broker.</Description></How>`);
	if (n.citations.length || n.description) {
		lines.push(`  <Citations>`);
		for (const c of n.citations) lines.push(`    <EventIVORN cite="${c.cite}">${esc(c.ivorn)}</EventIVORN>`);
		if (n.description) lines.push(`    <Description>${esc(n.description)}</Description>`);
		lines.push(`  </Citations>`);
	}
	lines.push(`</voe:VOEvent>`);
	return lines.join('\n') + '\n';
}
