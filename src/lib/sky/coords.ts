/**
 * HEALPix index arithmetic (Górski et al. 2005, ApJ 622, 759) on top of @hscmap/healpix.
 *
 * @hscmap/healpix 1.4.12 packs nested indices with 32-bit integer operations, so its
 * nested-index functions are wrong above order 15 (checked against healpy in coords.spec.ts).
 * We therefore use only its floating-point steps (fxy2tu, tu2za, ring2fxy, nest2ring ≤ order 15),
 * and do point→pixel and the bit interleaving here in double precision, which is exact up to
 * order 24 (12·4^24 < 2^53). The RING scheme goes through the library's own conversions
 * and is limited to order 15 — far beyond any flat map that fits in memory.
 *
 * The NUNIQ scheme (IVOA MOC 2.0 §4.2; Górski et al. HEALPix primer §3.2):
 * uniq = 4·4^order + ipix.
 */
import * as healpix from '@hscmap/healpix';

export const MAX_NESTED_ORDER = 24;
export const MAX_RING_ORDER = 15;
const TWO_PI = 2 * Math.PI;
const DEG = Math.PI / 180;
const TWO32 = 4294967296;

/** 4π sr in square degrees: (180/π)² · 4π. */
export const SPHERE_DEG2 = (4 * Math.PI) / (DEG * DEG);
export const SR_TO_DEG2 = 1 / (DEG * DEG);

export function nside(order: number): number {
	return 2 ** order;
}

export function npix(order: number): number {
	return 12 * 4 ** order;
}

/** Pixel solid angle in steradians at an order: 4π / (12·4^order). */
export function pixelAreaSr(order: number): number {
	return (4 * Math.PI) / npix(order);
}

/** log2 of an nside, or null when nside is not a power of two ≥ 1. */
export function orderOfNside(nsideValue: number): number | null {
	if (!Number.isInteger(nsideValue) || nsideValue < 1) return null;
	const o = Math.round(Math.log2(nsideValue));
	return 2 ** o === nsideValue ? o : null;
}

function checkOrder(order: number, max: number): void {
	if (!Number.isInteger(order) || order < 0 || order > max) {
		throw new RangeError(`HEALPix order ${order} is outside the supported range 0..${max}`);
	}
}

function spread16(v: number): number {
	v &= 0xffff;
	v = (v | (v << 8)) & 0x00ff00ff;
	v = (v | (v << 4)) & 0x0f0f0f0f;
	v = (v | (v << 2)) & 0x33333333;
	v = (v | (v << 1)) & 0x55555555;
	return v >>> 0;
}

function compact32(v: number): number {
	v &= 0x55555555;
	v = (v | (v >>> 1)) & 0x33333333;
	v = (v | (v >>> 2)) & 0x0f0f0f0f;
	v = (v | (v >>> 4)) & 0x00ff00ff;
	v = (v | (v >>> 8)) & 0x0000ffff;
	return v;
}

/** Interleave x (even bits) and y (odd bits), each < 2^24, into a double. */
export function interleave(x: number, y: number): number {
	const lo = (spread16(x) | (spread16(y) << 1)) >>> 0;
	const hi = (spread16(Math.floor(x / 65536)) | (spread16(Math.floor(y / 65536)) << 1)) >>> 0;
	return hi * TWO32 + lo;
}

export function deinterleave(p: number): { x: number; y: number } {
	const lo = p % TWO32 >>> 0;
	const hi = Math.floor(p / TWO32) >>> 0;
	return {
		x: compact32(lo) + compact32(hi) * 65536,
		y: compact32(lo >>> 1) + compact32(hi >>> 1) * 65536
	};
}

function normalisePhi(phi: number): number {
	let a = phi % TWO_PI;
	if (a < 0) a += TWO_PI;
	if (a >= TWO_PI) a = 0;
	return a;
}

/**
 * Nested pixel index containing (z = cos θ, φ); `sinTheta` is used near the poles for accuracy.
 * The face/x/y arithmetic of the HEALPix library's loc2pix (Górski et al. 2005 §4, eqs. 5–9),
 * written out here because @hscmap/healpix mis-assigns points on exact face corners
 * (e.g. θ = π/2, φ = π/4 lands in face 0 instead of 5).
 */
function zaToNest(order: number, z: number, phi: number, sinTheta?: number): number {
	const n = nside(order);
	const za = Math.abs(z);
	let tt = (normalisePhi(phi) / (Math.PI / 2)) % 4;
	if (tt < 0) tt += 4;
	let face: number;
	let ix: number;
	let iy: number;
	if (za <= 2 / 3) {
		const t1 = n * (0.5 + tt);
		const t2 = n * (z * 0.75);
		const jp = Math.floor(t1 - t2);
		const jm = Math.floor(t1 + t2);
		const ifp = Math.floor(jp / n);
		const ifm = Math.floor(jm / n);
		face = ifp === ifm ? ifp | 4 : ifp < ifm ? ifp : ifm + 8;
		ix = jm - ifm * n;
		iy = n - (jp - ifp * n) - 1;
	} else {
		const ntt = Math.min(3, Math.floor(tt));
		const tp = tt - ntt;
		const tmp = za > 0.99 && sinTheta !== undefined ? (n * sinTheta) / Math.sqrt((1 + za) / 3) : n * Math.sqrt(3 * (1 - za));
		const jp = Math.min(n - 1, Math.floor(tp * tmp));
		const jm = Math.min(n - 1, Math.floor((1 - tp) * tmp));
		if (z >= 0) {
			face = ntt;
			ix = n - jm - 1;
			iy = n - jp - 1;
		} else {
			face = ntt + 8;
			ix = jp;
			iy = jm;
		}
	}
	return face * n * n + interleave(ix, iy);
}

/** Nested index of the pixel containing RA/Dec (degrees) at an order ≤ 24. */
export function radecToNest(order: number, raDeg: number, decDeg: number): number {
	checkOrder(order, MAX_NESTED_ORDER);
	// θ = π/2 − δ as healpy's lonlat=True does, so points on pixel boundaries fall the same way.
	const theta = Math.PI / 2 - decDeg * DEG;
	return zaToNest(order, Math.cos(theta), raDeg * DEG, Math.sin(theta));
}

/** Nested index from colatitude θ and longitude φ (radians), healpy's ang2pix(nest=True). */
export function angToNest(order: number, theta: number, phi: number): number {
	checkOrder(order, MAX_NESTED_ORDER);
	return zaToNest(order, Math.cos(theta), phi, Math.sin(theta));
}

/** RING index from θ, φ (radians), healpy's ang2pix(nest=False). */
export function angToRing(order: number, theta: number, phi: number): number {
	checkOrder(order, MAX_RING_ORDER);
	return healpix.nest2ring(nside(order), zaToNest(order, Math.cos(theta), phi, Math.sin(theta)));
}

export function radecToRing(order: number, raDeg: number, decDeg: number): number {
	checkOrder(order, MAX_RING_ORDER);
	const theta = Math.PI / 2 - decDeg * DEG;
	return healpix.nest2ring(nside(order), zaToNest(order, Math.cos(theta), raDeg * DEG, Math.sin(theta)));
}

/** Centre (θ, φ in radians, φ in [0, 2π)) of a nested pixel, healpy's pix2ang(nest=True). */
export function nestToAng(order: number, ipix: number): { theta: number; phi: number } {
	checkOrder(order, MAX_NESTED_ORDER);
	const n = nside(order);
	const n2 = n * n;
	const f = Math.floor(ipix / n2);
	const { x, y } = deinterleave(ipix - f * n2);
	const { t, u } = healpix.fxy2tu(n, f, x, y);
	const { z, a } = healpix.tu2za(t, u);
	return { theta: Math.acos(Math.max(-1, Math.min(1, z))), phi: normalisePhi(a) };
}

export function ringToAng(order: number, ipix: number): { theta: number; phi: number } {
	checkOrder(order, MAX_RING_ORDER);
	const { theta, phi } = healpix.pix2ang_ring(nside(order), ipix);
	return { theta, phi: normalisePhi(phi) };
}

export function thetaPhiToRadec(theta: number, phi: number): { ra: number; dec: number } {
	return { ra: normalisePhi(phi) / DEG, dec: 90 - theta / DEG };
}

export function nestToRadec(order: number, ipix: number): { ra: number; dec: number } {
	const { theta, phi } = nestToAng(order, ipix);
	return thetaPhiToRadec(theta, phi);
}

export function nestToRing(order: number, ipix: number): number {
	checkOrder(order, MAX_RING_ORDER);
	return healpix.nest2ring(nside(order), ipix);
}

export function ringToNest(order: number, ipix: number): number {
	checkOrder(order, MAX_RING_ORDER);
	if (order === 0) return ipix;
	const n = nside(order);
	const { f, x, y } = healpix.ring2fxy(n, ipix);
	return f * n * n + interleave(x, y);
}

/** (order, ipix) of a NUNIQ value given as a safe integer (order ≤ 24). */
export function uniqToOrderPix(uniq: number): { order: number; ipix: number } {
	if (!Number.isSafeInteger(uniq) || uniq < 4) throw new RangeError(`invalid NUNIQ value ${uniq}`);
	let order = Math.floor(Math.log2(uniq / 4) / 2);
	// log2 can round across a power of 4 near the top of an order's range; fix it exactly.
	while (order > 0 && 4 * 4 ** order > uniq) order--;
	while (4 * 4 ** (order + 1) <= uniq) order++;
	return { order, ipix: uniq - 4 * 4 ** order };
}

/** NUNIQ of (order, ipix): 4·4^order + ipix. */
export function orderPixToUniq(order: number, ipix: number): number {
	return 4 * 4 ** order + ipix;
}

/** Order of a NUNIQ value of any size (BigInt), for validating files before conversion. */
export function uniqOrderBig(uniq: bigint): number {
	if (uniq < 4n) throw new RangeError(`invalid NUNIQ value ${uniq}`);
	const bits = uniq.toString(2).length; // uniq in [4^(o+1), 4^(o+2)) ⇒ bit length 2o+3 or 2o+4
	return Math.floor((bits - 3) / 2);
}
