import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { gunzipSync } from 'node:zlib';
import { afterAll, describe, expect, it } from 'vitest';
import { FIXTURE_META, FIXTURE_SPEC } from '../tests/fixtures/notices/skymap-fixture.ts';
import { card, writeBinTable } from './fits.ts';
import {
	ansatzMoments,
	distanceParameters,
	erfc,
	fisherDensity,
	fromNuniq,
	generateSkymap,
	nuniq,
	pixelCentreDeg,
	radecToVec,
	skymapToFits,
	truncatedMoments
} from './skymap.ts';

const DEG = Math.PI / 180;
const root = fileURLToPath(new URL('..', import.meta.url));
const fixtureDir = join(root, 'tests/fixtures/notices');

/** Area (deg²) of the Fisher cap holding probability `level`: 2π(1 − cos θ) with
 *  1 − cos θ = −ln(1 − level·(1 − e^{−2κ}))/κ (integral of the Fisher density; Fisher 1953). */
function fisherCapAreaDeg2(level: number, sigmaDeg: number): number {
	const kappa = 1 / (sigmaDeg * DEG) ** 2;
	const oneMinusCos = -Math.log(1 - level * -Math.expm1(-2 * kappa)) / kappa;
	return 2 * Math.PI * oneMinusCos / DEG ** 2;
}

function angleDeg(ra1: number, dec1: number, ra2: number, dec2: number): number {
	const a = radecToVec(ra1, dec1);
	const b = radecToVec(ra2, dec2);
	return Math.acos(Math.min(1, a[0] * b[0] + a[1] * b[1] + a[2] * b[2])) / DEG;
}

/** Trapezoid rule on a fine grid: an independent check of the closed forms. */
function integrate(f: (r: number) => number, a: number, b: number, n = 200_000): number {
	const h = (b - a) / n;
	let s = 0.5 * (f(a) + f(b));
	for (let i = 1; i < n; i++) s += f(a + i * h);
	return s * h;
}

describe('NUNIQ', () => {
	it('follows 4·4^order + ipix (IVOA MOC 1.1 §2.3.1)', () => {
		expect(nuniq(0, 0)).toBe(4n);
		expect(nuniq(0, 11)).toBe(15n);
		expect(nuniq(1, 0)).toBe(16n);
		expect(nuniq(9, 1593433)).toBe(4n * 4n ** 9n + 1593433n);
		// Order 24, last pixel: 16·4^24 − 1 (ipix still exact as a double; NUNIQ is a BigInt).
		expect(nuniq(24, 12 * 4 ** 24 - 1)).toBe(16n * 4n ** 24n - 1n);
		for (const [o, p] of [[0, 0], [4, 3071], [9, 123456], [12, 201326591]] as const) {
			expect(fromNuniq(nuniq(o, p))).toEqual({ order: o, ipix: p });
		}
		expect(() => fromNuniq(3n)).toThrow();
	});

	it('puts pixel centres with RA in [0, 360)', () => {
		for (let ipix = 0; ipix < 48; ipix++) {
			const c = pixelCentreDeg(1, ipix);
			expect(c.raDeg).toBeGreaterThanOrEqual(0);
			expect(c.raDeg).toBeLessThan(360);
		}
	});
});

describe('distance ansatz (Singer et al. 2016)', () => {
	it('matches numerical integration for the truncated moments', () => {
		for (const [mu, sigma] of [[100, 30], [20, 50], [-10, 40]]) {
			const m = truncatedMoments(mu, sigma);
			const gauss = (r: number) => Math.exp(-0.5 * ((r - mu) / sigma) ** 2) / (sigma * Math.sqrt(2 * Math.PI));
			for (let k = 0; k <= 4; k++) {
				const num = integrate((r) => r ** k * gauss(r), 0, Math.max(mu, 0) + 15 * sigma);
				// erfc of Numerical Recipes has fractional error < 1.2e-7.
				expect(m[k] / num).toBeCloseTo(1, 5);
			}
		}
	});

	it('finds DISTMU/DISTSIGMA/DISTNORM that give the wanted mean and std', () => {
		for (const [mean, std] of [[40, 10], [118, 24], [190, 70], [1400, 450], [500, 280]]) {
			const p = distanceParameters(mean, std);
			const m = ansatzMoments(p.mu, p.sigma);
			expect(m.meanMpc / mean).toBeCloseTo(1, 7);
			expect(m.stdMpc / std).toBeCloseTo(1, 7);
			const gauss = (r: number) => Math.exp(-0.5 * ((r - p.mu) / p.sigma) ** 2) / (p.sigma * Math.sqrt(2 * Math.PI));
			const z = integrate((r) => r * r * gauss(r), 0, Math.max(p.mu, 0) + 15 * p.sigma);
			// Near the 1/√3 limit μ < 0 and ∫r²N = μ²M0 + 2μσM1 + σ²M2 cancels, amplifying erfc's 1e-7.
			expect(p.norm * z).toBeCloseTo(1, std / mean < 0.5 ? 5 : 4);
		}
		expect(() => distanceParameters(100, 60)).toThrow(/below 1\/√3/);
	});

	it('erfc agrees with tabulated values (Abramowitz & Stegun, Table 7.1)', () => {
		// erf(0.5) = 0.5204998778, erf(1) = 0.8427007929, erf(2) = 0.9953222650.
		expect(1 - erfc(0.5)).toBeCloseTo(0.5204998778, 6);
		expect(1 - erfc(1)).toBeCloseTo(0.8427007929, 6);
		expect(1 - erfc(2)).toBeCloseTo(0.995322265, 6);
		expect(erfc(-1)).toBeCloseTo(1.8427007929, 6);
	});
});

describe('generated maps', () => {
	it('integrate to 1, peak at the centre and have the Fisher cap areas', () => {
		for (const widthDeg of [1.2, 4, 12]) {
			const map = generateSkymap({
				components: [{ raDeg: 40, decDeg: 35, widthDeg }],
				distance: { meanMpc: 200, stdMpc: 60 }
			});
			let sum = 0;
			let best = -1;
			let bestI = 0;
			const rows = map.uniq.map((u, i) => {
				const { order, ipix } = fromNuniq(u);
				const area = (4 * Math.PI) / (12 * 4 ** order);
				sum += map.probDensity[i] * area;
				if (map.probDensity[i] > best) {
					best = map.probDensity[i];
					bestI = i;
				}
				return { order, ipix, area, d: map.probDensity[i] };
			});
			expect(sum).toBeCloseTo(1, 12);
			const peak = pixelCentreDeg(rows[bestI].order, rows[bestI].ipix);
			const pixelDeg = Math.sqrt(rows[bestI].area) / DEG;
			expect(angleDeg(peak.raDeg, peak.decDeg, 40, 35)).toBeLessThan(pixelDeg);
			rows.sort((a, b) => b.d - a.d);
			let cum = 0;
			let area90 = 0;
			for (const r of rows) {
				if (cum >= 0.9) break;
				cum += r.d * r.area;
				area90 += r.area;
			}
			expect(area90 / DEG ** 2 / fisherCapAreaDeg2(0.9, widthDeg)).toBeCloseTo(1, 1);
			// Pixels of a sky tiling: total area 4π.
			expect(rows.reduce((s, r) => s + r.area, 0)).toBeCloseTo(4 * Math.PI, 9);
		}
	});

	it('refine where the probability is', () => {
		const map = generateSkymap({ components: [{ raDeg: 10, decDeg: -60, widthDeg: 2 }], distance: { meanMpc: 100, stdMpc: 20 } });
		const orders = map.uniq.map((u) => fromNuniq(u).order);
		expect(Math.min(...orders)).toBe(4);
		expect(Math.max(...orders)).toBe(map.maxOrder);
		expect(map.maxOrder).toBeGreaterThanOrEqual(7);
		// Every finest pixel lies within a few σ of the centre.
		map.uniq.forEach((u, i) => {
			const { order, ipix } = fromNuniq(u);
			if (order === map.maxOrder) {
				const c = pixelCentreDeg(order, ipix);
				expect(angleDeg(c.raDeg, c.decDeg, 10, -60)).toBeLessThan(6 * 2);
			}
			expect(map.probDensity[i]).toBeGreaterThanOrEqual(0);
		});
	});

	it('has a normalised Fisher density', () => {
		// ∫ p dΩ = 2π ∫₀^π p(θ) sin θ dθ = 1.
		for (const s of [0.5, 5, 40]) {
			const total = 2 * Math.PI * integrate((t) => fisherDensity(t, s * DEG) * Math.sin(t), 0, Math.PI, 400_000);
			expect(total).toBeCloseTo(1, 6);
		}
	});
});

describe('FITS writer', () => {
	it('writes 80-character cards in 2880-byte blocks', () => {
		expect(card('SIMPLE', true)).toBe('SIMPLE  =                    T' + ' '.repeat(50));
		expect(card('NAXIS1', 40).slice(10, 30)).toBe('                  40');
		expect(card('TTYPE1', 'UNIQ').slice(10, 20)).toBe("'UNIQ    '");
		expect(card('DISTMEAN', 118).slice(10, 30).trim()).toBe('118');
		expect(card('DISTMEAN', 1.5e-30).slice(10, 30).trim()).toBe('1.5E-30');
		expect(card('OBJECT', "it's").slice(10, 20)).toBe("'it''s   '");
		const f = writeBinTable([{ name: 'A', format: 'K', data: [1n, 2n] }]);
		expect(f.length % 2880).toBe(0);
		expect(f.subarray(0, 6).toString()).toBe('SIMPLE');
		expect(f.subarray(2880, 2888).toString()).toBe('XTENSION');
		expect(f.readBigInt64BE(5760)).toBe(1n);
		expect(f.readBigInt64BE(5768)).toBe(2n);
	});
});

describe('astropy reads the broker maps (Debian python3-astropy / healpy)', () => {
	const recorded = JSON.parse(readFileSync(join(fixtureDir, 'skymap-demo.astropy.json'), 'utf8'));
	const expectAgrees = (summary: any, map: ReturnType<typeof generateSkymap>) => {
		expect(summary.rows).toBe(map.uniq.length);
		expect(summary.columns).toEqual(['UNIQ', 'PROBDENSITY', 'DISTMU', 'DISTSIGMA', 'DISTNORM']);
		expect(summary.dtypes.UNIQ).toBe('>i8');
		expect(summary.units).toMatchObject({ PROBDENSITY: '1 / sr', DISTMU: 'Mpc', DISTSIGMA: 'Mpc', DISTNORM: '1 / Mpc2' });
		expect(summary.header).toMatchObject({ PIXTYPE: 'HEALPIX', ORDERING: 'NUNIQ', INDXSCHM: 'EXPLICIT', MOCORDER: map.maxOrder });
		expect(summary.probabilitySum).toBeCloseTo(1, 9);
		const c = FIXTURE_SPEC.components[0];
		// healpy's pixel centre of the densest pixel lies within one order-9 pixel (0.11°) of the blob centre.
		expect(angleDeg(summary.peak.ra, summary.peak.dec, c.raDeg, c.decDeg)).toBeLessThan(0.12);
		expect(summary.area90Deg2 / fisherCapAreaDeg2(0.9, c.widthDeg)).toBeCloseTo(1, 1);
		expect(summary.area50Deg2 / fisherCapAreaDeg2(0.5, c.widthDeg)).toBeCloseTo(1, 1);
		// Distance in the densest pixel, integrated by numpy: the wanted mean, moved by the gradient.
		const d = FIXTURE_SPEC.distance;
		const wantedMean = d.meanMpc * (1 + d.gradientPerRad * (summary.peak.dec - c.decDeg) * DEG);
		expect(summary.peakDistance.meanMpc / wantedMean).toBeCloseTo(1, 4);
		expect(summary.peakDistance.stdMpc / (wantedMean * (d.stdMpc / d.meanMpc))).toBeCloseTo(1, 4);
		expect(summary.peakDistance.norm / summary.peakDistance.integratedNorm).toBeCloseTo(1, 5);
	};

	it('agrees with the recorded astropy summary of the committed fixture', () => {
		const map = generateSkymap(FIXTURE_SPEC);
		// The committed file is what this code writes today (deterministic output).
		const committed = gunzipSync(readFileSync(join(fixtureDir, 'skymap-demo.multiorder.fits.gz')));
		expect(gunzipSync(skymapToFits(map, FIXTURE_META)).equals(committed)).toBe(true);
		expect(recorded.versions.astropy).toMatch(/^\d/);
		expectAgrees(recorded.maps[0], map);
	});

	const python = '/usr/bin/python3';
	const hasAstropy = spawnSync(python, ['-c', 'import astropy, healpy'], { stdio: 'ignore' }).status === 0;
	const tmp = mkdtempSync(join(tmpdir(), 'strainline-fits-'));
	afterAll(() => rmSync(tmp, { recursive: true, force: true }));

	it.skipIf(!hasAstropy)('reads a freshly written two-lobed map too (live run)', () => {
		const spec = {
			components: [
				{ raDeg: 359.5, decDeg: 10, widthDeg: 6, weight: 0.7 },
				{ raDeg: 30, decDeg: -5, widthDeg: 3, weight: 0.3 }
			],
			distance: { meanMpc: 300, stdMpc: 100, gradientPerRad: -0.3 }
		};
		const map = generateSkymap(spec);
		const file = join(tmp, 'two-lobes.multiorder.fits.gz');
		writeFileSync(file, skymapToFits(map, { object: 'SX30050101', dateObs: '2030-05-01T00:00:00' }));
		const out = JSON.parse(execFileSync(python, [join(root, 'fake-alert-broker/check_fits.py'), file], { encoding: 'utf8' }));
		const s = out.maps[0];
		expect(s.rows).toBe(map.uniq.length);
		expect(s.probabilitySum).toBeCloseTo(1, 9);
		expect(s.header.OBJECT).toBe('SX30050101');
		// Peak density goes as weight/σ²: 0.3/3² beats 0.7/6², so the narrow lobe holds the peak.
		expect(angleDeg(s.peak.ra, s.peak.dec, 30, -5)).toBeLessThan(0.5);
		// The 90 % region of a mixture is larger than the main lobe's own 90 % cap.
		expect(s.area90Deg2).toBeGreaterThan(fisherCapAreaDeg2(0.9, 6));
		expect(s.peakDistance.norm / s.peakDistance.integratedNorm).toBeCloseTo(1, 5);
	});
});
