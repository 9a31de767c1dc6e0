import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { DEFAULT_TRIAGE_POLICY, evaluateTriage, formatQuantity, probabilityNS, type TriageFacts } from './triage.ts';
import { parseVoevent } from './voevent.ts';

const dir = fileURLToPath(new URL('../../../tests/fixtures/notices/', import.meta.url));
const fixture = (name: string) => parseVoevent(readFileSync(dir + name, 'utf8'));

function factsOf(name: string, extra: Partial<TriageFacts> = {}): TriageFacts {
	const n = fixture(name);
	return {
		role: n.role,
		retracted: n.kind === 'retraction',
		farHz: n.far,
		classification: n.classification,
		properties: n.properties,
		area90Deg2: null,
		distanceMpc: null,
		...extra
	};
}

describe('probabilityNS', () => {
	it('takes HasNS when the notice gives it, else BNS + NSBH', () => {
		expect.hasAssertions();
		// bbh-initial.xml: HasNS 0, BNS 0, NSBH 0.004.
		expect(probabilityNS(fixture('bbh-initial.xml'))).toEqual({ value: 0, source: 'HasNS' });
		// bns-update.xml has no Properties group: BNS 0.99 + NSBH 0.01.
		expect(probabilityNS(fixture('bns-update.xml'))).toEqual({ value: 1, source: 'BNS+NSBH' });
		// test-role.xml: BNS 0.5 + NSBH 0.2.
		expect(probabilityNS(fixture('test-role.xml'))?.value).toBeCloseTo(0.7, 12);
		expect(probabilityNS({ classification: null, properties: null })).toBeNull();
	});
});

describe('evaluateTriage', () => {
	it('follows a nearby, well-localised neutron-star merger and says why', () => {
		expect.hasAssertions();
		// bns-preliminary.xml: FAR 3.1e-10 Hz = 3.1e-10 × 31 557 600 s/yr (Julian year, IAU) = 9.78e-3 per year.
		const r = evaluateTriage(DEFAULT_TRIAGE_POLICY, factsOf('bns-preliminary.xml', { area90Deg2: 31.4, distanceMpc: 118 }));
		expect(r.verdict).toBe('follow');
		expect(r.reasons).toEqual([
			'role observation',
			'FAR 9.8×10⁻³/yr ≤ 12/yr',
			'P(NS) 1.00 ≥ 0.10 (HasNS)',
			'90% area 31 deg² ≤ 2000 deg²',
			'distance 118 Mpc ≤ 400 Mpc'
		]);
	});

	it('skips a black-hole merger on P(NS) alone', () => {
		expect.hasAssertions();
		const r = evaluateTriage(DEFAULT_TRIAGE_POLICY, factsOf('bbh-initial.xml', { area90Deg2: 850, distanceMpc: 900 }));
		expect(r.verdict).toBe('skip');
		expect(r.reasons).toContain('P(NS) 0.00 < 0.10 (HasNS) → skip');
		expect(r.reasons).toContain('distance 900 Mpc > 400 Mpc → skip');
		// FAR 2.5e-9 Hz × 31 557 600 = 0.0789 per year.
		expect(r.reasons).toContain('FAR 0.079/yr ≤ 12/yr');
	});

	it('each threshold decides on its own, at its boundary', () => {
		expect.hasAssertions();
		const base = factsOf('bns-preliminary.xml', { area90Deg2: 2000, distanceMpc: 400 });
		expect(evaluateTriage(DEFAULT_TRIAGE_POLICY, base).verdict).toBe('follow');
		expect(evaluateTriage(DEFAULT_TRIAGE_POLICY, { ...base, area90Deg2: 2400 }).reasons).toContain('90% area 2400 deg² > 2000 deg² → skip');
		expect(evaluateTriage(DEFAULT_TRIAGE_POLICY, { ...base, distanceMpc: 401 }).verdict).toBe('skip');
		expect(evaluateTriage({ ...DEFAULT_TRIAGE_POLICY, maxFarPerYear: 0.001 }, base).reasons).toContain('FAR 9.8×10⁻³/yr > 0.001/yr → skip');
		expect(evaluateTriage({ ...DEFAULT_TRIAGE_POLICY, minProbNS: 1 }, base).verdict).toBe('follow');
		const lowNS = { ...base, properties: null, classification: { BNS: 0.01, NSBH: 0.01, BBH: 0.9, Terrestrial: 0.08 } };
		expect(evaluateTriage(DEFAULT_TRIAGE_POLICY, lowNS).reasons).toContain('P(NS) 0.02 < 0.10 (BNS+NSBH) → skip');
	});

	it('skips a test notice unless the policy lets test notices through', () => {
		expect.hasAssertions();
		const facts = factsOf('test-role.xml', { area90Deg2: 100, distanceMpc: 100 });
		const strict = evaluateTriage(DEFAULT_TRIAGE_POLICY, facts);
		expect(strict.verdict).toBe('skip');
		expect(strict.reasons[0]).toBe('role test ≠ observation → skip');
		const lax = evaluateTriage({ ...DEFAULT_TRIAGE_POLICY, requireObservationRole: false }, facts);
		expect(lax.verdict).toBe('follow');
		expect(lax.reasons.some((r) => r.startsWith('role'))).toBe(false);
	});

	it('does not hold an unknown sky map against the event, and always skips a retraction', () => {
		expect.hasAssertions();
		const r = evaluateTriage(DEFAULT_TRIAGE_POLICY, factsOf('bns-initial.xml'));
		expect(r.verdict).toBe('follow');
		expect(r.reasons).toContain('90% area not known yet (not checked)');
		const retracted = evaluateTriage(DEFAULT_TRIAGE_POLICY, factsOf('retraction.xml'));
		expect(retracted.verdict).toBe('skip');
		expect(retracted.reasons[0]).toBe('retracted by the source → skip');
		expect(evaluateTriage(DEFAULT_TRIAGE_POLICY, { ...factsOf('bns-initial.xml'), retracted: true }).verdict).toBe('skip');
	});

	it('formats quantities with two significant digits', () => {
		expect.hasAssertions();
		expect([0.3, 0.0789, 12, 1234.4, 0.00978, 0].map(formatQuantity)).toEqual(['0.3', '0.079', '12', '1234', '9.8×10⁻³', '0']);
	});
});
