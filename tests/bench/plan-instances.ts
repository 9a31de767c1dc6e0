/**
 * Invented planning instances for measuring the network plan against the optimum
 * (plan-optimum.bench.ts, src/lib/targeting/plan-milp.spec.ts). Sites, telescopes and targets are
 * made up; targets are drawn, with a seed, from a synthetic sky map.
 *
 * The synthetic sky map is a mixture of Fisher (von Mises–Fisher on the sphere) blobs with
 * seeded centres and widths. Positions are drawn from it (Wood 1994, "Simulation of the von
 * Mises Fisher distribution", Commun. Stat. Simul. 23: in 3-D the cosine to the mean direction is
 * w = 1 + ln(ξ + (1 − ξ) e^(−2κ)) / κ for uniform ξ), and a target's probability is the map's
 * density at its position times a uniform galaxy weight, normalised so that all targets hold 0.9.
 */
import { mulberry32 } from '../../fake-alert-broker/prng.ts';
import type { PlanClaim, PlanInput, PlanTarget, PlanTelescope } from '../../src/lib/targeting/plan-types.ts';

/** Invented sites, spread in longitude. */
const SITES = [
	{ name: 'Cumbre Seca', latitudeDeg: -29.9, longitudeDeg: -70.5, elevationM: 2300 },
	{ name: 'Vlakte', latitudeDeg: -32.2, longitudeDeg: 20.6, elevationM: 1750 },
	{ name: 'Gumtree Ridge', latitudeDeg: -31.1, longitudeDeg: 149.3, elevationM: 1150 },
	{ name: 'Roque Bajo', latitudeDeg: 28.6, longitudeDeg: -17.6, elevationM: 2350 },
	{ name: 'Mauna Iki', latitudeDeg: 19.6, longitudeDeg: -155.3, elevationM: 3900 },
	{ name: 'Hanle Flat', latitudeDeg: 32.6, longitudeDeg: 78.8, elevationM: 4400 },
	{ name: 'Sierra Parda', latitudeDeg: 37.0, longitudeDeg: -2.7, elevationM: 2100 }
];

export interface InstanceSpec {
	label: string;
	seed: number;
	telescopes: number;
	targets: number;
	/** Plan start (UTC); the plan lasts 24 h, one night at every site. */
	start: string;
	/** Exposure, s (all telescopes; slews are drawn per telescope). */
	exposureS: number;
	/** Fisher concentrations of the map's blobs (larger: tighter); default two drawn blobs. */
	blobs?: number;
}

function direction(raDeg: number, decDeg: number): [number, number, number] {
	const r = (raDeg * Math.PI) / 180;
	const d = (decDeg * Math.PI) / 180;
	return [Math.cos(d) * Math.cos(r), Math.cos(d) * Math.sin(r), Math.sin(d)];
}

export function planInstance(spec: InstanceSpec): PlanInput {
	const rnd = mulberry32(spec.seed);
	const telescopes: PlanTelescope[] = Array.from({ length: spec.telescopes }, (_, i) => {
		const site = SITES[i % SITES.length];
		const wide = i % 3 === 1;
		return {
			id: `T${i}`,
			name: `${site.name} ${wide ? 'wide' : 'narrow'}`,
			latitudeDeg: site.latitudeDeg,
			longitudeDeg: site.longitudeDeg,
			elevationM: site.elevationM,
			fovShape: 'rectangle',
			fovWidthDeg: wide ? 2.5 : 0.5,
			fovHeightDeg: wide ? 2.5 : 0.5,
			filters: ['r', 'g', 'i'],
			limitingMag: 21,
			limitingMagExposureS: spec.exposureS,
			minAltitudeDeg: 25 + Math.floor(rnd() * 10),
			maxAirmass: 2 + rnd() * 0.5,
			minSunSeparationDeg: 40,
			minMoonSeparationDeg: 15 + rnd() * 15,
			slewOverheadS: 30 + 10 * Math.floor(rnd() * 7)
		};
	});
	// The map: blobs with centres anywhere in −60° … +30° declination, widths 8–25°.
	const blobs = Array.from({ length: spec.blobs ?? 2 }, () => {
		const ra = rnd() * 360;
		const dec = -60 + rnd() * 90;
		const sigmaDeg = 8 + rnd() * 17;
		return { mu: direction(ra, dec), kappa: 1 / ((sigmaDeg * Math.PI) / 180) ** 2, weight: 0.3 + rnd() };
	});
	const totalWeight = blobs.reduce((s, b) => s + b.weight, 0);
	const density = (x: [number, number, number]) =>
		blobs.reduce((s, b) => {
			const c = b.mu[0] * x[0] + b.mu[1] * x[1] + b.mu[2] * x[2];
			return s + ((b.weight / totalWeight) * b.kappa * Math.exp(b.kappa * (c - 1))) / (2 * Math.PI * (1 - Math.exp(-2 * b.kappa)));
		}, 0);
	const draw = (): [number, number] => {
		let u = rnd() * totalWeight;
		const b = blobs.find((x) => (u -= x.weight) <= 0) ?? blobs[blobs.length - 1];
		const xi = rnd();
		const w = 1 + Math.log(xi + (1 - xi) * Math.exp(-2 * b.kappa)) / b.kappa;
		const phi = 2 * Math.PI * rnd();
		// An orthonormal frame around the blob's centre.
		const [mx, my, mz] = b.mu;
		const a: [number, number, number] = Math.abs(mz) < 0.9 ? [0, 0, 1] : [1, 0, 0];
		let e1: [number, number, number] = [a[1] * mz - a[2] * my, a[2] * mx - a[0] * mz, a[0] * my - a[1] * mx];
		const n1 = Math.hypot(...e1);
		e1 = [e1[0] / n1, e1[1] / n1, e1[2] / n1];
		const e2: [number, number, number] = [my * e1[2] - mz * e1[1], mz * e1[0] - mx * e1[2], mx * e1[1] - my * e1[0]];
		const r = Math.sqrt(Math.max(0, 1 - w * w));
		const x = mx * w + r * (Math.cos(phi) * e1[0] + Math.sin(phi) * e2[0]);
		const y = my * w + r * (Math.cos(phi) * e1[1] + Math.sin(phi) * e2[1]);
		const z = mz * w + r * (Math.cos(phi) * e1[2] + Math.sin(phi) * e2[2]);
		return [((Math.atan2(y, x) * 180) / Math.PI + 360) % 360, (Math.asin(Math.max(-1, Math.min(1, z))) * 180) / Math.PI];
	};
	const wide = telescopes.filter((_, i) => i % 3 === 1).map((t) => t.id);
	const targets: PlanTarget[] = Array.from({ length: spec.targets }, (_, i) => {
		const [raDeg, decDeg] = draw();
		const field = wide.length > 0 && rnd() < 0.3;
		const roll = rnd();
		return {
			id: `${field ? 'F' : 'G'}${i}`,
			kind: field ? 'field' : 'galaxy',
			raDeg,
			decDeg,
			probability: density(direction(raDeg, decDeg)) * (0.2 + rnd()),
			fieldFor: field ? wide[Math.floor(rnd() * wide.length)] : undefined,
			visits: roll < 0.08 ? [{ filter: 'r' }, { filter: 'g' }] : roll < 0.11 ? [{ filter: 'r', epoch: 0 }, { filter: 'r', epoch: 1 }] : undefined
		};
	});
	const sum = targets.reduce((s, t) => s + t.probability, 0);
	for (const t of targets) t.probability = (0.9 * t.probability) / sum;
	const claims: PlanClaim[] = [];
	for (let k = 0; k < Math.max(1, Math.round(spec.targets / 50)); k++) {
		const t = targets[Math.floor(rnd() * targets.length)];
		claims.push({ targetId: t.id, telescopeId: telescopes[Math.floor(rnd() * telescopes.length)].id });
	}
	return { targets, telescopes, claims, start: new Date(spec.start), horizonH: 24, exposureS: spec.exposureS };
}

/** The small instances solved exactly: 3–4 telescopes, 60–200 targets, one night. */
export const SMALL: InstanceSpec[] = [
	{ label: 'S1 3 tel × 60 targets, Mar', seed: 101, telescopes: 3, targets: 60, start: '2026-03-20T12:00:00Z', exposureS: 600 },
	{ label: 'S2 3 tel × 100 targets, Jun', seed: 102, telescopes: 3, targets: 100, start: '2026-06-21T12:00:00Z', exposureS: 600 },
	{ label: 'S3 4 tel × 120 targets, Sep', seed: 103, telescopes: 4, targets: 120, start: '2026-09-22T12:00:00Z', exposureS: 600 },
	{ label: 'S4 4 tel × 160 targets, Dec', seed: 104, telescopes: 4, targets: 160, start: '2026-12-02T12:00:00Z', exposureS: 600 },
	{ label: 'S5 4 tel × 200 targets, Jan', seed: 105, telescopes: 4, targets: 200, start: '2027-01-15T12:00:00Z', exposureS: 600 },
	{ label: 'S6 3 tel × 200 targets, Aug', seed: 106, telescopes: 3, targets: 200, start: '2026-08-10T12:00:00Z', exposureS: 900 }
];

/** The large instance: 7 telescopes, 2,000 targets, one night each. */
export const LARGE: InstanceSpec = { label: 'L 7 tel × 2000 targets, Dec', seed: 201, telescopes: 7, targets: 2000, start: '2026-12-02T12:00:00Z', exposureS: 180 };
