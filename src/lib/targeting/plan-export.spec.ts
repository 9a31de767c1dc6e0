import { describe, expect, it } from 'vitest';
import { planNetwork } from './plan.ts';
import type { NetworkPlan, PlanTarget, PlanTelescope } from './plan-types.ts';
import { csvField } from '../csv.ts';
import {
	formatDecDms,
	formatRaHms,
	observingListCsv,
	observingListJson,
	observingListRows,
	OBSERVING_LIST_COLUMNS,
	type ObservingListDocument
} from './plan-export.ts';

/** Minimal RFC 4180 reader for the checks (quoted fields, doubled quotes, CRLF records). */
function readCsv(text: string): string[][] {
	const rows: string[][] = [];
	let row: string[] = [];
	let field = '';
	let quoted = false;
	for (let i = 0; i < text.length; i++) {
		const c = text[i];
		if (quoted) {
			if (c === '"' && text[i + 1] === '"') {
				field += '"';
				i++;
			} else if (c === '"') quoted = false;
			else field += c;
		} else if (c === '"') quoted = true;
		else if (c === ',') {
			row.push(field);
			field = '';
		} else if (c === '\r' && text[i + 1] === '\n') {
			row.push(field);
			rows.push(row);
			row = [];
			field = '';
			i++;
		} else field += c;
	}
	if (field !== '' || row.length > 0) throw new Error('last record lacks its CRLF');
	return rows;
}

// Site values as tests/fixtures/night (desert-south-29).
const scope: PlanTelescope = {
	id: 'S1',
	name: 'South One',
	latitudeDeg: -29.25,
	longitudeDeg: -70.73,
	elevationM: 2400,
	fovShape: 'circle',
	fovWidthDeg: 0.5,
	fovHeightDeg: 0.5,
	filters: ['r', 'g'],
	limitingMag: 21,
	limitingMagExposureS: 240,
	minAltitudeDeg: 25,
	maxAirmass: 2.2,
	minSunSeparationDeg: 45,
	minMoonSeparationDeg: 15,
	slewOverheadS: 45
};

const targets: PlanTarget[] = [
	{ id: 'gal-1', kind: 'galaxy', name: 'Demo galaxy "A", north arm', raDeg: 150.25, decDeg: -30.5, probability: 0.31 },
	{ id: 'gal-2', kind: 'galaxy', name: 'plain', raDeg: 160.5, decDeg: -45.25, probability: 0.22, visits: [{ filter: 'g' }, { filter: 'r' }] },
	{ id: 'gal-3', kind: 'galaxy', raDeg: 140, decDeg: -10, probability: 0.05 }
];

function demoPlan(): NetworkPlan {
	return planNetwork({ targets, telescopes: [scope], start: new Date('2022-03-20T16:00:00Z') });
}

describe('sexagesimal formatting', () => {
	// Reference strings: astropy 5.2.1 (Debian 12 python3-astropy),
	//   Angle(ra, u.deg).to_string(unit=u.hour, sep=':', precision=2, pad=True)  and  precision=1 without sep;
	//   Angle(dec, u.deg).to_string(unit=u.deg, sep=':', precision=1, pad=True, alwayssign=True).
	it('RA agrees with astropy, including the worked value 83.633° = 05h34m31.9s', () => {
		expect.hasAssertions();
		const cases: [number, string, string][] = [
			[83.633, '05:34:31.92', '05h34m31.9s'],
			[10.684708, '00:42:44.33', '00h42m44.3s'],
			[201.365063, '13:25:27.62', '13h25m27.6s'],
			[279.234735, '18:36:56.34', '18h36m56.3s'],
			[0.0041666, '00:00:01.00', '00h00m01.0s'],
			[0, '00:00:00.00', '00h00m00.0s']
		];
		for (const [ra, colon, letters] of cases) {
			expect(formatRaHms(ra)).toBe(colon);
			expect(formatRaHms(ra, { decimals: 1, style: 'letters' })).toBe(letters);
		}
	});

	it('rounding carries into minutes and hours; 24 h wraps to 00h (astropy prints 24h00m00.0s here)', () => {
		expect.hasAssertions();
		expect(formatRaHms(359.9999, { decimals: 1, style: 'letters' })).toBe('00h00m00.0s');
		// 14.99999° = 0h59m59.9976s → 01:00:00.00 at two decimals.
		expect(formatRaHms(14.99999)).toBe('01:00:00.00');
		expect(formatRaHms(-15)).toBe('23:00:00.00');
		expect(formatDecDms(29.99999999)).toBe('+30:00:00.0');
	});

	it('Dec agrees with astropy, signed, with a carry-safe last field', () => {
		expect.hasAssertions();
		const cases: [number, string][] = [
			[22.0145, '+22:00:52.2'],
			[-0.5, '-00:30:00.0'],
			[-43.019113, '-43:01:08.8'],
			[38.783689, '+38:47:01.3'],
			[-0.0001, '-00:00:00.4'],
			[-29.00781, '-29:00:28.1']
		];
		for (const [dec, text] of cases) expect(formatDecDms(dec)).toBe(text);
		expect(formatDecDms(-43.019113, { decimals: 0 })).toBe('-43:01:09');
		// A value that rounds to zero is written +00:00:00 (astropy keeps the minus sign: −00:00:00).
		expect(formatDecDms(-0.0001, { decimals: 0 })).toBe('+00:00:00');
		expect(formatDecDms(22.0145, { style: 'letters' })).toBe('+22d00m52.2s');
		expect(() => formatDecDms(91)).toThrow(/−90…90/);
		expect(() => formatRaHms(10, { decimals: 9 })).toThrow(/decimals/);
	});
});

describe('CSV field escaping (RFC 4180 §2)', () => {
	it('quotes only what needs quoting and doubles inner quotes', () => {
		expect.hasAssertions();
		expect(csvField('plain')).toBe('plain');
		expect(csvField('a,b')).toBe('"a,b"');
		expect(csvField('say "hi"')).toBe('"say ""hi"""');
		expect(csvField('two\nlines')).toBe('"two\nlines"');
		expect(csvField('')).toBe('');
	});
});

describe('observing list export', () => {
	it('CSV: header, one CRLF record per assignment, values that read back', () => {
		expect.hasAssertions();
		const plan = demoPlan();
		const list = plan.telescopes[0].assignments;
		expect(list.length).toBe(4);
		const csv = observingListCsv(plan, 'S1');
		expect(csv.startsWith('order,target_id,name,kind,ra_deg,dec_deg,ra_hms,dec_dms,start_utc,end_utc,exposure_s,filter,epoch,airmass_start,altitude_start_deg,moon_separation_deg,probability,cumulative_probability\r\n')).toBe(true);
		const rows = readCsv(csv);
		expect(rows[0]).toEqual([...OBSERVING_LIST_COLUMNS]);
		expect(rows).toHaveLength(list.length + 1);
		const col = (name: (typeof OBSERVING_LIST_COLUMNS)[number]) => OBSERVING_LIST_COLUMNS.indexOf(name);
		rows.slice(1).forEach((r, i) => {
			const a = list[i];
			expect(r).toHaveLength(OBSERVING_LIST_COLUMNS.length);
			expect(r[col('order')]).toBe(String(i + 1));
			expect(r[col('target_id')]).toBe(a.targetId);
			expect(r[col('name')]).toBe(a.name ?? '');
			expect(Number(r[col('ra_deg')])).toBeCloseTo(a.raDeg, 6);
			expect(r[col('ra_hms')]).toBe(formatRaHms(a.raDeg));
			expect(r[col('dec_dms')]).toBe(formatDecDms(a.decDeg));
			expect(r[col('start_utc')]).toBe(a.start);
			expect(Date.parse(r[col('end_utc')]) - Date.parse(r[col('start_utc')])).toBe(240_000);
			expect(r[col('exposure_s')]).toBe('240');
			expect(r[col('filter')]).toBe(a.filter);
			expect(Number(r[col('airmass_start')])).toBeCloseTo(a.airmass, 3);
			expect(Number(r[col('altitude_start_deg')])).toBeGreaterThanOrEqual(25);
			expect(Number(r[col('cumulative_probability')])).toBeCloseTo(a.cumulativeProbability, 8);
		});
		// The quoted name with a comma and quotes survives the round trip.
		expect(rows.some((r) => r[col('name')] === 'Demo galaxy "A", north arm')).toBe(true);
		expect(csv).toContain('"Demo galaxy ""A"", north arm"');
		// Cumulative: each target counted once (gal-2 is visited in g and in r).
		expect(Number(rows[rows.length - 1][col('cumulative_probability')])).toBeCloseTo(0.31 + 0.22 + 0.05, 8);
	});

	it('150.25°, −30.5° is written 10:01:00.00, −30:30:00.0 (exact by hand: 150.25/15 = 10.01667 h)', () => {
		expect.hasAssertions();
		const row = observingListRows(demoPlan(), 'S1').find((r) => r.targetId === 'gal-1')!;
		expect(row.raHms).toBe('10:01:00.00');
		expect(row.decDms).toBe('-30:30:00.0');
	});

	it('JSON: a self-describing document with the same rows', () => {
		expect.hasAssertions();
		const plan = demoPlan();
		const doc = JSON.parse(observingListJson(plan, 'S1', 'S-demo-7 map 2')) as ObservingListDocument;
		expect(doc.format).toBe('strainline-observing-list');
		expect(doc.version).toBe(1);
		expect(doc.label).toBe('S-demo-7 map 2');
		expect(doc.telescope).toEqual({ id: 'S1', name: 'South One', exposureS: 240, slewOverheadS: 45, defaultFilter: 'r' });
		expect(doc.planStart).toBe('2022-03-20T16:00:00.000Z');
		expect(doc.darkness).toHaveLength(1);
		expect(doc.observations).toEqual(observingListRows(plan, 'S1'));
		expect(doc.observations.map((o) => `${o.targetId}:${o.filter}`).sort()).toEqual(['gal-1:r', 'gal-2:g', 'gal-2:r', 'gal-3:r']);
	});

	it('CSV: text a spreadsheet would run is prefixed with a quote; numbers, positions and the JSON stay as they are', () => {
		expect.hasAssertions();
		const hostile: PlanTarget[] = [
			{ id: '=cmd|calc', kind: 'galaxy', name: '=HYPERLINK("http://x.test","click")', raDeg: 150.25, decDeg: -30.5, probability: 0.31 },
			{ id: 'gal-n', kind: 'galaxy', name: '-23.4', raDeg: 160.5, decDeg: -45.25, probability: 0.22 },
			{ id: 'gal-at', kind: 'galaxy', name: '@SUM(A1)', raDeg: 140, decDeg: -10, probability: 0.05 }
		];
		const plan = planNetwork({ targets: hostile, telescopes: [scope], start: new Date('2022-03-20T16:00:00Z') });
		const rows = readCsv(observingListCsv(plan, 'S1')).slice(1);
		const col = (name: (typeof OBSERVING_LIST_COLUMNS)[number]) => OBSERVING_LIST_COLUMNS.indexOf(name);
		const byId = new Map(rows.map((r) => [r[col('target_id')], r]));
		expect(byId.get("'=cmd|calc")?.[col('name')]).toBe('\'=HYPERLINK("http://x.test","click")');
		expect(byId.get('gal-n')?.[col('name')]).toBe('-23.4');
		expect(byId.get('gal-at')?.[col('name')]).toBe("'@SUM(A1)");
		expect(byId.get('gal-n')?.[col('dec_dms')]).toBe('-45:15:00.0');
		expect(byId.get('gal-n')?.[col('dec_deg')]).toBe('-45.250000');
		const doc = JSON.parse(observingListJson(plan, 'S1')) as ObservingListDocument;
		expect(doc.observations.map((o) => o.name).sort()).toEqual(['-23.4', '=HYPERLINK("http://x.test","click")', '@SUM(A1)']);
	});

	it('an unknown telescope is an error, not an empty list', () => {
		expect.hasAssertions();
		expect(() => observingListCsv(demoPlan(), 'nope')).toThrow(/not in this plan/);
	});
});
