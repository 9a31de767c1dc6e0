import { describe, expect, it } from 'vitest';
import { npix, pixelAreaSr, SR_TO_DEG2 } from './coords.ts';
import * as healpix from '@hscmap/healpix';
import { nestToAng } from './coords.ts';
import { credibleLevelsOfDensities, credibleRegions } from './credible.ts';
import type { SkyMap } from './moc.ts';

function flatMap(order: number, density: Float64Array): SkyMap {
	return {
		ordering: 'NESTED', size: density.length, order: null, ipix: null, probDensity: density,
		distMu: null, distSigma: null, distNorm: null, minOrder: order, maxOrder: order,
		probabilitySumRaw: 1, coverage: 1, warnings: []
	};
}

/** Reference by full sort + cumulative sum (the definition), for comparison with the radix selection. */
function bySort(density: Float64Array, area: (i: number) => number, level: number): { areaSr: number; count: number } {
	const idx = Array.from(density.keys()).sort((a, b) => density[b] - density[a]);
	let total = 0;
	for (let i = 0; i < density.length; i++) total += density[i] * area(i);
	let p = 0;
	let a = 0;
	let count = 0;
	for (const i of idx) {
		p += density[i] * area(i);
		a += area(i);
		count++;
		if (p >= level * total) return { areaSr: a, count };
	}
	return { areaSr: a, count };
}

describe('credible regions', () => {
	it('radix selection equals a full sort on random, tied and heavy-tailed maps', () => {
		expect.hasAssertions();
		let seed = 12345;
		const rand = () => ((seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648);
		const order = 5;
		const n = npix(order);
		const a = pixelAreaSr(order);
		const kinds = [
			(i: number) => rand(),
			(i: number) => Math.floor(rand() * 4), // many ties
			(i: number) => Math.exp(40 * rand()), // spans 17 decades
			(i: number) => (i % 97 === 0 ? 1 : 1e-9) // one dominant class, crossing inside a huge bucket
		];
		for (const f of kinds) {
			const d = Float64Array.from({ length: n }, (_, i) => f(i));
			const sum = d.reduce((s, v) => s + v * a, 0);
			for (let i = 0; i < n; i++) d[i] /= sum;
			const regions = credibleRegions(flatMap(order, d), [0.5, 0.9, 0.99]);
			for (const r of regions) {
				const ref = bySort(d, () => a, r.level);
				expect(r.pixelCount).toBe(ref.count);
				expect(r.areaSr / ref.areaSr).toBeCloseTo(1, 12);
			}
		}
	});

	it('credible level of a density = probability of strictly denser pixels', () => {
		expect.hasAssertions();
		const d = Float64Array.from([4, 3, 3, 2, 1, 0, 0, 0, 0, 0, 0, 0]);
		const a = pixelAreaSr(0);
		const s = d.reduce((x, v) => x + v * a, 0);
		const map = flatMap(0, d.map((v) => v / s));
		const levels = credibleLevelsOfDensities(map, [4 / s, 3 / s, 2 / s, 0, 10]);
		expect(Array.from(levels).map((v) => Math.round(v * 13 * 1e9) / 1e9)).toEqual([0, 4, 10, 13, 0]);
	});

	/*
	 * Analytic check: von Mises–Fisher density f(n) = κ e^{κ(n·μ−1)} / (2π(1 − e^{−2κ})) has
	 * P(<θ) = (1 − e^{−κ(1−cos θ)}) / (1 − e^{−2κ}) (Fisher 1953, Proc. R. Soc. A 217, 295), so the
	 * L credible cap has 1 − cos θ_L = −ln(1 − L(1 − e^{−2κ}))/κ and area 2π(1 − cos θ_L).
	 * Pixelisation error bound: a pixel lies wholly inside or wholly outside the exact cap unless
	 * the cap boundary crosses it; the greedy region differs from the cap only in such boundary
	 * pixels, so |A_pix − A_cap| ≤ N_boundary · Ω_pix (N_boundary counted from pixel corners,
	 * plus one pixel for the last-pixel overshoot).
	 */
	it.each([
		[30, 7],
		[300, 8],
		[3000, 9]
	])('Fisher κ=%d at order %d: 90 percent area within the stated pixelisation error', (kappa, order) => {
		expect.hasAssertions();
		const n = npix(order);
		const omega = pixelAreaSr(order);
		const mu = [0.3, -0.5, Math.sqrt(1 - 0.34)];
		const d = new Float64Array(n);
		const dots = new Float64Array(n);
		for (let i = 0; i < n; i++) {
			const { theta, phi } = nestToAng(order, i);
			const v = [Math.sin(theta) * Math.cos(phi), Math.sin(theta) * Math.sin(phi), Math.cos(theta)];
			dots[i] = v[0] * mu[0] + v[1] * mu[1] + v[2] * mu[2];
			d[i] = (kappa * Math.exp(kappa * (dots[i] - 1))) / (2 * Math.PI * (1 - Math.exp(-2 * kappa)));
		}
		const sum = d.reduce((s, v) => s + v * omega, 0);
		for (let i = 0; i < n; i++) d[i] /= sum;
		const L = 0.9;
		const oneMinusCos = -Math.log(1 - L * (1 - Math.exp(-2 * kappa))) / kappa;
		const capSr = 2 * Math.PI * oneMinusCos;
		const cosCap = 1 - oneMinusCos;
		let boundary = 0;
		for (let i = 0; i < n; i++) {
			if (Math.abs(dots[i] - cosCap) > 0.05) continue; // far from the boundary
			const corners = healpix.corners_nest(2 ** order, i);
			const inside = corners.map((c) => c[0] * mu[0] + c[1] * mu[1] + c[2] * mu[2] > cosCap);
			inside.push(dots[i] > cosCap);
			if (inside.some((x) => x) && inside.some((x) => !x)) boundary++;
		}
		const [r] = credibleRegions(flatMap(order, d), [L]);
		const bound = (boundary + 1) * omega;
		expect(boundary).toBeGreaterThan(0);
		expect(Math.abs(r.areaSr - capSr)).toBeLessThanOrEqual(bound);
		// The bound is not vacuous: it is a small fraction of the area.
		expect(bound / capSr).toBeLessThan(0.25);
		console.info(
			`κ=${kappa} order ${order}: pixels ${(r.areaSr * SR_TO_DEG2).toFixed(3)} deg², analytic ${(capSr * SR_TO_DEG2).toFixed(3)} deg², bound ±${(bound * SR_TO_DEG2).toFixed(3)} deg² (${boundary} boundary px)`
		);
	});
});
