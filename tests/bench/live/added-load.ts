/**
 * The heavy work the live benchmark adds in the middle of its main phase, the way it reaches a
 * running server:
 *  - an update notice for the bench event, published by the fake alert broker over VTP, whose sky
 *    map is a flat HEALPix map (RING, nside 1024, one float64 PROB column, 100 MB) served by the
 *    broker's HTTP server: the app fetches it, analyses it and re-ranks the event's galaxies;
 *  - a pointing CSV (`POST /api/v1/observations`, `text/csv`) from a demo observer, for a telescope
 *    the driver never claims with, every row a new pointing and one `observation.reported`.
 * Everything here is invented: the map is a Fisher (von Mises–Fisher) blob of our own.
 */
import { writeBinTable } from '../../../fake-alert-broker/fits.ts';
import { buildNoticeXml } from '../../../fake-alert-broker/notices.ts';
import { ringToAng } from '../../../src/lib/sky/coords.ts';
import type { AppWorld } from './app-world.ts';

export const FLAT_ORDER = 10;
const DEG = Math.PI / 180;

/**
 * A flat RING map at nside 2^FLAT_ORDER: probability per pixel of a Fisher distribution on the
 * sphere centred on (raDeg, decDeg), concentration κ = 1 / σ² with σ = widthDeg in radians
 * (density ∝ exp(κ (cos γ − 1)), γ the angle to the centre; Fisher 1953). Uncompressed float64,
 * as a flat map of that size usually is (its mantissas do not compress). Walks the map ring by
 * ring: the pixels of a RING-ordered ring are equally spaced in φ (Górski et al. 2005, §4), so
 * only each ring's first pixel needs `ringToAng`.
 */
export function flatMapFits(o: { raDeg: number; decDeg: number; widthDeg: number; object: string; dateObs: string }): Buffer {
	const nside = 2 ** FLAT_ORDER;
	const npix = 12 * nside * nside;
	const kappa = 1 / (o.widthDeg * DEG) ** 2;
	const cx = Math.cos(o.decDeg * DEG) * Math.cos(o.raDeg * DEG);
	const cy = Math.cos(o.decDeg * DEG) * Math.sin(o.raDeg * DEG);
	const cz = Math.sin(o.decDeg * DEG);
	const prob = new Float64Array(npix);
	let sum = 0;
	for (let ring = 1, first = 0; ring < 4 * nside; ring++) {
		const count = 4 * Math.min(ring, nside, 4 * nside - ring);
		const { theta, phi } = ringToAng(FLAT_ORDER, first);
		const st = Math.sin(theta);
		const ct = Math.cos(theta);
		const step = (2 * Math.PI) / count;
		for (let j = 0; j < count; j++) {
			const p = Math.exp(kappa * (st * (Math.cos(phi + j * step) * cx + Math.sin(phi + j * step) * cy) + ct * cz - 1));
			prob[first + j] = p;
			sum += p;
		}
		first += count;
	}
	for (let i = 0; i < npix; i++) prob[i] /= sum;
	return writeBinTable(
		[{ name: 'PROB', format: 'D', unit: 'pix-1', data: prob }],
		[
			{ key: 'PIXTYPE', value: 'HEALPIX' },
			{ key: 'ORDERING', value: 'RING' },
			{ key: 'COORDSYS', value: 'C' },
			{ key: 'NSIDE', value: nside },
			{ key: 'INDXSCHM', value: 'IMPLICIT' },
			{ key: 'OBJECT', value: o.object },
			{ key: 'DATE-OBS', value: o.dateObs }
		],
		'SKYMAP'
	);
}

/** The update notice (VOEvent 2.0, as the fake broker writes them) superseding the bench event's notice. */
export function updateNoticeXml(w: AppWorld, skymapUrl: string): string {
	const sourceId = w.notice.sourceId;
	return buildNoticeXml({
		ivorn: `ivo://strainline.example/fake-broker#${sourceId}-3-update`,
		role: 'observation',
		authoredAt: new Date().toISOString(),
		eventTime: w.notice.eventTime,
		sourceEventId: sourceId,
		kind: 'update',
		farHz: 3.1e-10,
		classification: { BNS: 0.97, NSBH: 0.02, BBH: 0, Terrestrial: 0.01 },
		properties: { HasNS: 1, HasRemnant: 0.99, HasMassGap: 0 },
		skymapUrl,
		citations: [{ ivorn: w.notice.ivorn, cite: 'supersedes' }]
	});
}

/**
 * `rows` pointings of the uploader's telescope as CSV: times spread between the merger and a minute
 * ago, positions on a 0.3° grid around the map's centre (a tiling), 120 s in the r band.
 */
export function pointingsCsv(w: AppWorld, rows: number, centre: { raDeg: number; decDeg: number }): string {
	const t0 = Date.parse(w.notice.eventTime) + 60_000;
	const t1 = Date.now() - 60_000;
	const side = Math.ceil(Math.sqrt(rows));
	const out = ['observed_at,ra_deg,dec_deg,filter,exposure_s,limiting_mag,seeing_arcsec,notes'];
	for (let k = 0; k < rows; k++) {
		const dec = Math.max(-89, Math.min(89, centre.decDeg + (Math.floor(k / side) - side / 2) * 0.3));
		const ra = (((centre.raDeg + (((k % side) - side / 2) * 0.3) / Math.cos(dec * DEG)) % 360) + 360) % 360;
		const at = new Date(t0 + ((t1 - t0) * k) / rows).toISOString();
		out.push(`${at},${ra.toFixed(5)},${dec.toFixed(5)},${w.uploader.telescope.filter},120,20.1,1.4,tile ${k + 1}`);
	}
	return out.join('\n') + '\n';
}
