/**
 * Shapes on the sky for coverage and the sky view: observed footprints (the same rectangles and
 * circles as `fields.ts`), small circles (Sun and Moon avoidance zones) and the Galactic plane.
 *
 * Footprints. A rectangle w × h about (α₀, δ₀) is the gnomonic rectangle |ξ| ≤ tan(w/2),
 * |η| ≤ tan(h/2), sides along RA and Dec at the centre (position angle 0), in standard coordinates
 * (Calabretta & Greisen 2002, A&A 395, 1077, TAN). With unit vectors c (centre), e (east) and
 * n (north) at the centre, ξ = p·e / p·c and η = p·n / p·c, so the rectangle is the intersection of
 * four half-spaces through the origin, p·(tan(w/2) c ∓ e) ≥ 0 and p·(tan(h/2) c ∓ n) ≥ 0: its
 * sides are great circles and its vertices the four tangent-plane corners. A circle of diameter d
 * is the cap p·c ≥ cos(d/2). These are exactly the tests of `fields.ts` (`inFootprint`).
 *
 * Galactic coordinates. The IAU 1958 system on J2000 axes: north Galactic pole at
 * α = 192.85948°, δ = +27.12825°, and Galactic longitude of the north celestial pole
 * l = 122.93192° (the standard J2000 definition, as used by the Hipparcos catalogue, ESA 1997,
 * vol. 1 §1.5.3; values from memory, checked here against astropy 5.2.1's Galactic → ICRS in
 * tests/fixtures/coverage/reference.json to 0.01°). The FK5 → ICRS frame bias (≈ 0.02″) is below
 * what the view needs and is ignored.
 */

const DEG = Math.PI / 180;

export type Vec3 = [number, number, number];

/** Field shape and size, degrees (the same union as `FieldOfView` in fields.ts). */
export type FootprintShape = { shape: 'rectangle'; widthDeg: number; heightDeg: number } | { shape: 'circle'; diameterDeg: number };

/** A footprint on the sky: its centre and shape. */
export type FootprintSpec = { raDeg: number; decDeg: number } & FootprintShape;

/** Unit vector of (RA, Dec) in degrees. */
export function unitVector(raDeg: number, decDeg: number): Vec3 {
	const a = raDeg * DEG;
	const d = decDeg * DEG;
	const cd = Math.cos(d);
	return [cd * Math.cos(a), cd * Math.sin(a), Math.sin(d)];
}

/** Great-circle distance (degrees) between two RA/Dec directions (Vincenty form, stable at 0 and 180°). */
export function angularSeparationDeg(a: { raDeg: number; decDeg: number }, b: { raDeg: number; decDeg: number }): number {
	const [ra1, d1, ra2, d2] = [a.raDeg * DEG, a.decDeg * DEG, b.raDeg * DEG, b.decDeg * DEG];
	const dra = ra2 - ra1;
	const y = Math.hypot(Math.cos(d2) * Math.sin(dra), Math.cos(d1) * Math.sin(d2) - Math.sin(d1) * Math.cos(d2) * Math.cos(dra));
	const x = Math.sin(d1) * Math.sin(d2) + Math.cos(d1) * Math.cos(d2) * Math.cos(dra);
	return Math.atan2(y, x) / DEG;
}

/** RA in [0, 360) and Dec of a (not necessarily unit) vector, degrees. */
export function vectorToRadec(v: Vec3): { raDeg: number; decDeg: number } {
	const r = Math.hypot(v[0], v[1], v[2]);
	let ra = Math.atan2(v[1], v[0]) / DEG;
	if (ra < 0) ra += 360;
	if (ra >= 360) ra -= 360;
	return { raDeg: ra, decDeg: Math.asin(Math.max(-1, Math.min(1, v[2] / r))) / DEG };
}

const dot = (a: Vec3, b: Vec3) => a[0] * b[0] + a[1] * b[1] + a[2] * b[2];

/** Centre, east and north unit vectors at (RA, Dec): the axes of the tangent plane. */
export function tangentFrame(raDeg: number, decDeg: number): { centre: Vec3; east: Vec3; north: Vec3 } {
	const a = raDeg * DEG;
	const d = decDeg * DEG;
	return {
		centre: unitVector(raDeg, decDeg),
		east: [-Math.sin(a), Math.cos(a), 0],
		north: [-Math.sin(d) * Math.cos(a), -Math.sin(d) * Math.sin(a), Math.cos(d)]
	};
}

/**
 * A footprint prepared for fast point and pixel tests: unit vector of the centre, circumradius
 * and, for a rectangle, the inward unit normals of its four great-circle sides.
 */
export interface FootprintGeometry {
	spec: FootprintSpec;
	centre: Vec3;
	/** Largest angular distance from the centre to the footprint's edge, radians. */
	circumradiusRad: number;
	/** Circle: cos of the radius. */
	cosRadius: number;
	/** Rectangle: inward normals of the sides (p·nᵢ ≥ 0 inside); empty for a circle. */
	normals: Vec3[];
}

function validateSpec(spec: FootprintSpec): void {
	if (!Number.isFinite(spec.raDeg) || !Number.isFinite(spec.decDeg) || spec.decDeg < -90 || spec.decDeg > 90) {
		throw new RangeError(`footprint centre ra=${spec.raDeg} dec=${spec.decDeg} is not a direction`);
	}
	const sizes = spec.shape === 'rectangle' ? [spec.widthDeg, spec.heightDeg] : [spec.diameterDeg];
	// Rectangles stay well inside the tangent plane's hemisphere; caps up to a hemisphere.
	const max = spec.shape === 'rectangle' ? 90 : 180;
	for (const s of sizes) if (!(s > 0 && s < max)) throw new RangeError(`footprint size ${s}° is outside (0, ${max})`);
}

/** Prepare a footprint for containment tests. */
export function footprintGeometry(spec: FootprintSpec): FootprintGeometry {
	validateSpec(spec);
	const { centre, east, north } = tangentFrame(spec.raDeg, spec.decDeg);
	if (spec.shape === 'circle') {
		const r = (spec.diameterDeg / 2) * DEG;
		return { spec, centre, circumradiusRad: r, cosRadius: Math.cos(r), normals: [] };
	}
	const tw = Math.tan((spec.widthDeg / 2) * DEG);
	const th = Math.tan((spec.heightDeg / 2) * DEG);
	const normal = (t: number, axis: Vec3, sign: number): Vec3 => {
		const k = 1 / Math.sqrt(1 + t * t);
		return [(t * centre[0] - sign * axis[0]) * k, (t * centre[1] - sign * axis[1]) * k, (t * centre[2] - sign * axis[2]) * k];
	};
	return {
		spec,
		centre,
		circumradiusRad: Math.atan(Math.hypot(tw, th)),
		cosRadius: NaN,
		normals: [normal(tw, east, 1), normal(tw, east, -1), normal(th, north, 1), normal(th, north, -1)]
	};
}

/** Whether a unit vector lies inside (or on the edge of) the footprint. */
export function containsVector(g: FootprintGeometry, p: Vec3): boolean {
	if (g.normals.length === 0) return dot(p, g.centre) >= g.cosRadius;
	for (const n of g.normals) if (dot(p, n) < 0) return false;
	return true;
}

/** Whether (RA, Dec) lies inside the footprint. */
export function footprintContains(g: FootprintGeometry, raDeg: number, decDeg: number): boolean {
	return containsVector(g, unitVector(raDeg, decDeg));
}

/** How a disc of angular radius r about p meets a footprint: certainly outside, maybe crossing the edge, certainly inside. */
export const DISC_OUTSIDE = 0;
export const DISC_PARTIAL = 1;
export const DISC_INSIDE = 2;
export type DiscRelation = typeof DISC_OUTSIDE | typeof DISC_PARTIAL | typeof DISC_INSIDE;

/**
 * Relation of the cap of radius `radiusRad` (< 90°) about unit vector p to the footprint,
 * conservatively: outside and inside are certain, partial means it may cross the edge. For a
 * rectangle the cap lies in a side's half-space iff asin(p·n) ≥ r, and outside it iff p·n < −sin r.
 */
export function discRelation(g: FootprintGeometry, p: Vec3, radiusRad: number, sinRadius = Math.sin(radiusRad)): DiscRelation {
	const cosCentre = dot(p, g.centre);
	// Farther from the centre than circumradius + r: disjoint.
	if (g.circumradiusRad + radiusRad < Math.PI && cosCentre < Math.cos(g.circumradiusRad + radiusRad)) return DISC_OUTSIDE;
	if (g.normals.length === 0) {
		const inner = g.circumradiusRad - radiusRad;
		return inner > 0 && cosCentre >= Math.cos(inner) ? DISC_INSIDE : DISC_PARTIAL;
	}
	let inside = true;
	for (const n of g.normals) {
		const s = dot(p, n);
		if (s < -sinRadius) return DISC_OUTSIDE;
		if (s < sinRadius) inside = false;
	}
	return inside ? DISC_INSIDE : DISC_PARTIAL;
}

/**
 * Outline of a footprint as [ra, dec] degrees, counter-clockwise on the sky as seen from inside
 * the sphere (north → east is to the left). Rectangle sides are great-circle arcs, sampled
 * `pointsPerSide` times so that they bend correctly in a plate carrée drawing.
 */
export function footprintPolygon(spec: FootprintSpec, pointsPerSide = 8): [number, number][] {
	validateSpec(spec);
	if (spec.shape === 'circle') return smallCircle(spec.raDeg, spec.decDeg, spec.diameterDeg / 2, Math.max(16, pointsPerSide * 4));
	const { centre, east, north } = tangentFrame(spec.raDeg, spec.decDeg);
	const tw = Math.tan((spec.widthDeg / 2) * DEG);
	const th = Math.tan((spec.heightDeg / 2) * DEG);
	const corners: [number, number][] = [
		[tw, th],
		[-tw, th],
		[-tw, -th],
		[tw, -th]
	];
	const out: [number, number][] = [];
	for (let k = 0; k < 4; k++) {
		const [x0, y0] = corners[k];
		const [x1, y1] = corners[(k + 1) % 4];
		for (let s = 0; s < pointsPerSide; s++) {
			const t = s / pointsPerSide;
			// A straight line in the tangent plane is a great circle on the sky.
			const xi = x0 + t * (x1 - x0);
			const eta = y0 + t * (y1 - y0);
			const v: Vec3 = [centre[0] + xi * east[0] + eta * north[0], centre[1] + xi * east[1] + eta * north[1], centre[2] + xi * east[2] + eta * north[2]];
			const { raDeg, decDeg } = vectorToRadec(v);
			out.push([raDeg, decDeg]);
		}
	}
	return out;
}

/**
 * Small circle of angular radius `radiusDeg` about (RA, Dec), as `points` [ra, dec] vertices:
 * the point at distance ρ and position angle θ (east of north) is
 * p = cos ρ c + sin ρ (cos θ n + sin θ e) (spherical trigonometry; e.g. Smart 1977, *Textbook on
 * Spherical Astronomy*, ch. II).
 */
export function smallCircle(raDeg: number, decDeg: number, radiusDeg: number, points = 72): [number, number][] {
	if (!(radiusDeg > 0 && radiusDeg < 180)) throw new RangeError(`radius ${radiusDeg}° is outside (0, 180)`);
	const { centre, east, north } = tangentFrame(raDeg, decDeg);
	const cr = Math.cos(radiusDeg * DEG);
	const sr = Math.sin(radiusDeg * DEG);
	const out: [number, number][] = [];
	for (let k = 0; k < points; k++) {
		const th = (2 * Math.PI * k) / points;
		const a = sr * Math.cos(th);
		const b = sr * Math.sin(th);
		const v: Vec3 = [cr * centre[0] + a * north[0] + b * east[0], cr * centre[1] + a * north[1] + b * east[1], cr * centre[2] + a * north[2] + b * east[2]];
		const { raDeg: r, decDeg: d } = vectorToRadec(v);
		out.push([r, d]);
	}
	return out;
}

/** North Galactic pole on J2000 axes and the Galactic longitude of the north celestial pole (see the module note). */
export const GALACTIC_POLE_RA_DEG = 192.85948;
export const GALACTIC_POLE_DEC_DEG = 27.12825;
export const GALACTIC_NCP_LONGITUDE_DEG = 122.93192;

/**
 * Galactic axes in equatorial components: z is the north Galactic pole; the north celestial
 * pole's projection onto the Galactic plane, u, lies at longitude l_NCP, and w = z × u at l_NCP + 90°,
 * so the l = 0 axis is x = cos(l_NCP) u − sin(l_NCP) w and y = z × x.
 */
function galacticMatrix(): [Vec3, Vec3, Vec3] {
	const z = unitVector(GALACTIC_POLE_RA_DEG, GALACTIC_POLE_DEC_DEG);
	// The NCP's component perpendicular to z points at Galactic longitude l_NCP.
	const ncp: Vec3 = [0, 0, 1];
	const k = dot(ncp, z);
	const u0: Vec3 = [ncp[0] - k * z[0], ncp[1] - k * z[1], ncp[2] - k * z[2]];
	const un = Math.hypot(...u0);
	const u: Vec3 = [u0[0] / un, u0[1] / un, u0[2] / un];
	// w = z × u completes a right-handed basis in the Galactic plane (90° further in l).
	const w: Vec3 = [z[1] * u[2] - z[2] * u[1], z[2] * u[0] - z[0] * u[2], z[0] * u[1] - z[1] * u[0]];
	// u is at longitude L = l_NCP, w at L + 90°: x (l = 0) = cos L u − sin L w.
	const L = GALACTIC_NCP_LONGITUDE_DEG * DEG;
	const x: Vec3 = [Math.cos(L) * u[0] - Math.sin(L) * w[0], Math.cos(L) * u[1] - Math.sin(L) * w[1], Math.cos(L) * u[2] - Math.sin(L) * w[2]];
	const y: Vec3 = [z[1] * x[2] - z[2] * x[1], z[2] * x[0] - z[0] * x[2], z[0] * x[1] - z[1] * x[0]];
	return [x, y, z];
}

const GAL = galacticMatrix();

/** Galactic (l, b) → equatorial (RA, Dec), degrees. */
export function galacticToEquatorial(lDeg: number, bDeg: number): { raDeg: number; decDeg: number } {
	const g = unitVector(lDeg, bDeg);
	const [x, y, z] = GAL;
	return vectorToRadec([g[0] * x[0] + g[1] * y[0] + g[2] * z[0], g[0] * x[1] + g[1] * y[1] + g[2] * z[1], g[0] * x[2] + g[1] * y[2] + g[2] * z[2]]);
}

/** Equatorial (RA, Dec) → Galactic (l, b), degrees. */
export function equatorialToGalactic(raDeg: number, decDeg: number): { lDeg: number; bDeg: number } {
	const p = unitVector(raDeg, decDeg);
	const { raDeg: l, decDeg: b } = vectorToRadec([dot(p, GAL[0]), dot(p, GAL[1]), dot(p, GAL[2])]);
	return { lDeg: l, bDeg: b };
}

/** The Galactic plane (b = 0) as [ra, dec] points every `stepDeg` of longitude, from l = 0. */
export function galacticPlane(stepDeg = 2): [number, number][] {
	if (!(stepDeg > 0 && stepDeg <= 90)) throw new RangeError(`step ${stepDeg}° is outside (0, 90]`);
	const out: [number, number][] = [];
	for (let l = 0; l < 360 - 1e-9; l += stepDeg) {
		const { raDeg, decDeg } = galacticToEquatorial(l, 0);
		out.push([raDeg, decDeg]);
	}
	return out;
}
