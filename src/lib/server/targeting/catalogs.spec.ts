import { readFileSync } from 'node:fs';
import { beforeEach, afterEach, describe, expect, it } from 'vitest';
import { asc, eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import * as table from '../platform/db/schema';
import { onRecorded, SYSTEM, type LiveMessage } from '../platform/realtime';
import { activeCatalog, CatalogError, galaxyCount, importCatalog, listCatalogs } from './catalogs';
import { INDEX_ORDER } from '../../targeting/galaxies';
import { radecToNest } from '../../sky/index';
import { generateSyntheticCatalog, syntheticCatalogCsv } from '../../../../seeds/synthetic-catalog';
import type { DB } from '../platform/db';

const FIX = new URL('../../../../tests/fixtures/', import.meta.url);
/** healpy 1.16.1 ang2pix (tests/fixtures/sky/make_fixtures.py, VERSIONS.md): θ, φ and NESTED pixels per order. */
const healpy = JSON.parse(readFileSync(new URL('sky/healpix_reference.json', FIX), 'utf8')) as {
	theta: number[];
	phi: number[];
	ang2pix: { order: number; nest: number[] }[];
};

let database: DB;
let log: LiveMessage[];
let unlisten: () => void;
beforeEach(() => {
	database = createTestDatabase();
	log = [];
	unlisten = onRecorded((m) => log.push(m));
});
afterEach(() => unlisten());

const galaxies = (catalogId: string) => database.select().from(table.galaxy).where(eq(table.galaxy.catalogId, catalogId)).orderBy(asc(table.galaxy.row)).all();

/** A source that hands out a string in pieces of `size` characters (lines and fields split anywhere). */
function* pieces(text: string, size: number) {
	for (let i = 0; i < text.length; i += size) yield text.slice(i, i + size);
}

describe('importCatalog: a good file', () => {
	it('stores every row with its NESTED pixel at the index order, matching healpy', async () => {
		expect.hasAssertions();
		// Points from the healpy reference: RA = φ, Dec = 90° − θ; the order-8 pixel is the order-10 one / 4² (nested bits).
		const order10 = healpy.ang2pix.find((a) => a.order === 10)!.nest;
		const pick = [0, 1, 2, 5, 17, 40, 99, 150];
		const deg = (r: number) => (r * 180) / Math.PI;
		let csv = 'name,ra,dec,distance,distance_err,b_abs\n';
		for (const k of pick) csv += `P${k},${deg(healpy.phi[k]).toFixed(12)},${(90 - deg(healpy.theta[k])).toFixed(12)},${50 + k},5,-20\n`;
		const out = await importCatalog(SYSTEM, { name: 'healpy points', columns: { id: 'name', ra: 'ra', dec: 'dec', distance: 'distance', distance_err: 'distance_err', b_abs: 'b_abs' } }, pieces(csv, 37));
		expect(out.state).toBe('ready');
		expect(out.rowCount).toBe(pick.length);
		expect(out.weightSource).toBe('b');
		const rows = galaxies(out.catalogId);
		expect(rows.map((r) => r.name)).toEqual(pick.map((k) => `P${k}`));
		pick.forEach((k, i) => {
			expect(rows[i].pixel, `point ${k}`).toBe(Math.floor(order10[k] / 16));
			expect(rows[i].pixel).toBe(radecToNest(INDEX_ORDER, rows[i].raDeg, rows[i].decDeg));
		});
		// M_B = −20 → L_B = 10^(−0.4(−20 − 5.48)) L⊙ = 10^10.192 L⊙ → weight 1.556 (in 10^10 L⊙), and back.
		expect(rows[0].weight).toBeCloseTo(10 ** (-0.4 * (-20 - 5.48)) / 1e10, 9);
		expect(rows[0].bAbsMag).toBeCloseTo(-20, 9);
		expect(rows[3].distanceMpc).toBe(55);
		expect(rows[3].distanceErrMpc).toBe(5);
		const cat = database.select().from(table.catalog).where(eq(table.catalog.id, out.catalogId)).get()!;
		expect(cat).toMatchObject({ state: 'ready', rowCount: pick.length, weightSource: 'b', synthetic: false, error: null });
		expect(log.map((m) => m.type)).toEqual(['catalog.started', 'catalog.progress', 'catalog.imported']);
		expect(log.at(-1)!.payload).toMatchObject({ catalogId: out.catalogId, rows: pick.length });
	});

	it('follows the column mapping, and ignores columns named like a field but not mapped', async () => {
		expect.hasAssertions();
		// `weight` and `b_abs` columns exist, but the mapping picks the K magnitude: the weight must come from K.
		const csv = ['# invented rows', 'GAL,RAJ2000,DEJ2000,D,weight,b_abs,Kmag', 'g1,10,20,100,999,-21,-23', 'g2,11,21,200,999,-21,-22'].join('\r\n');
		const out = await importCatalog(
			SYSTEM,
			{ name: 'mapped', columns: { id: 'GAL', ra: 'RAJ2000', dec: 'DEJ2000', distance: 'D', k_abs: 'Kmag' } },
			pieces(csv, 5)
		);
		expect(out.state).toBe('ready');
		expect(out.weightSource).toBe('k');
		expect(out.mapping).toEqual({ id: 'GAL', ra: 'RAJ2000', dec: 'DEJ2000', distance: 'D', k_abs: 'Kmag' });
		const rows = galaxies(out.catalogId);
		// L_K / 10^10 L⊙ = 10^(−0.4 (M_K − 3.28)) / 10^10 (M_K,⊙ = 3.28, Binney & Merrifield 1998, from memory).
		expect(rows[0].weight).toBeCloseTo(10 ** (-0.4 * (-23 - 3.28)) / 1e10, 9);
		expect(rows[1].weight).toBeCloseTo(10 ** (-0.4 * (-22 - 3.28)) / 1e10, 9);
		expect(rows.map((r) => [r.name, r.raDeg, r.decDeg, r.distanceMpc, r.distanceErrMpc, r.bAbsMag])).toEqual([
			['g1', 10, 20, 100, 0, null],
			['g2', 11, 21, 200, 0, null]
		]);
		// With no proxy mapped, every galaxy weighs the same even though a weight column is there.
		const flat = await importCatalog(SYSTEM, { name: 'flat', columns: { id: 'GAL', ra: 'RAJ2000', dec: 'DEJ2000', distance: 'D' } }, [csv]);
		expect(flat.weightSource).toBe('none');
		expect(galaxies(flat.catalogId).map((r) => r.weight)).toEqual([1, 1]);
	});

	it('refuses a mapping that is incomplete or maps one column twice', async () => {
		expect.hasAssertions();
		await expect(importCatalog(SYSTEM, { name: 'x', columns: { ra: 'a', dec: 'b' } }, ['a,b\n'])).rejects.toThrow(CatalogError);
		await expect(importCatalog(SYSTEM, { name: 'x', columns: { ra: 'a', dec: 'a', distance: 'c' } }, ['a,c\n'])).rejects.toThrow(/mapped to two fields/);
		await expect(importCatalog(SYSTEM, { name: 'x', columns: { ra: 'a', dec: 'b', distance: 'c', b_abs: 'd', mass: 'e' } }, [''])).rejects.toThrow(/one luminosity proxy/);
		await expect(importCatalog(SYSTEM, { name: '  ' }, [''])).rejects.toThrow(/name/);
		expect(listCatalogs()).toEqual([]);
	});
});

describe('importCatalog: bad rows', () => {
	const bad = [
		'id,ra,dec,distance,distance_err,weight',
		'a,10,10,100,10,1',
		'b,400,10,100,10,1', // line 3: RA out of range
		'c,10,10,100,10,1',
		'd,10,-95,100,10,1', // line 5: Dec out of range
		'a,12,12,100,10,1', // line 6: duplicate id
		'e,10,10,-4,10,1', // line 7: distance
		'f,10,10,100,10', // line 8: one field short
		'g,10,10,100,10,1'
	].join('\n');

	it('reports every rejected row with its line and stores NOTHING', async () => {
		expect.hasAssertions();
		const out = await importCatalog(SYSTEM, { name: 'bad' }, pieces(bad, 11));
		expect(out.state).toBe('failed');
		expect(out.rowCount).toBe(0);
		expect(out.report.rowsSeen).toBe(8);
		expect(out.report.rejectedCount).toBe(5);
		expect(out.report.rejected.map((r) => r.line)).toEqual([3, 5, 6, 7, 8]);
		expect(out.report.rejected[0].reason).toMatch(/ra "400"/);
		expect(out.report.rejected[2].reason).toMatch(/duplicate id "a" \(first on line 2\)/);
		expect(out.error).toBe('5 of 8 rows were rejected');
		expect(galaxyCount(out.catalogId)).toBe(0);
		expect(database.select().from(table.galaxy).all()).toEqual([]);
		const cat = database.select().from(table.catalog).where(eq(table.catalog.id, out.catalogId)).get()!;
		expect(cat.state).toBe('failed');
		expect(cat.report!.rejected).toHaveLength(5);
		expect(activeCatalog()).toBeNull();
		expect(log.at(-1)).toMatchObject({ type: 'catalog.failed', payload: { catalogId: out.catalogId, rejected: 5 } });
	});

	it('keeps only the valid rows when asked to, with the same report', async () => {
		expect.hasAssertions();
		const out = await importCatalog(SYSTEM, { name: 'bad but kept', skipInvalid: true }, [bad]);
		expect(out.state).toBe('ready');
		expect(out.report.rejected.map((r) => r.line)).toEqual([3, 5, 6, 7, 8]);
		expect(galaxies(out.catalogId).map((r) => r.name)).toEqual(['a', 'c', 'g']);
		expect(activeCatalog()?.id).toBe(out.catalogId);
	});

	it('fails the whole file on a missing column or when it is too large, storing nothing', async () => {
		expect.hasAssertions();
		const noDist = await importCatalog(SYSTEM, { name: 'no distance' }, ['id,ra,dec\na,1,2\n']);
		expect(noDist.state).toBe('failed');
		expect(noDist.error).toMatch(/header lacks distance/);
		const big = await importCatalog(SYSTEM, { name: 'too big', maxBytes: 100 }, pieces(bad, 40));
		expect(big.state).toBe('failed');
		expect(big.error).toMatch(/larger than/);
		const broken = (async function* () {
			yield 'id,ra,dec,distance\na,1,2,3\n';
			throw new Error('connection reset');
		})();
		const cut = await importCatalog(SYSTEM, { name: 'cut' }, broken);
		expect(cut.error).toMatch(/interrupted: connection reset/);
		expect(database.select().from(table.galaxy).all()).toEqual([]);
	});
});

describe('importCatalog: a big file through a stream', () => {
	it('reads 10^5 rows from a ReadableStream one chunk at a time, never far ahead of the parser', async () => {
		expect.hasAssertions();
		const options = { rows: 100_000, maxDistanceMpc: 400, seed: 5 };
		const cat = generateSyntheticCatalog(options);
		const source = syntheticCatalogCsv(cat, options, 2000);
		const encoder = new TextEncoder();
		let produced = 0;
		let producedBytes = 0;
		let maxAhead = 0;
		let consumedChunks = 0;
		const stream = new ReadableStream<Uint8Array>(
			{
				pull(controller) {
					const next = source.next();
					if (next.done) return controller.close();
					produced++;
					const bytes = encoder.encode(next.value);
					producedBytes += bytes.byteLength;
					controller.enqueue(bytes);
				}
			},
			{ highWaterMark: 1 }
		);
		const started = performance.now();
		const out = await importCatalog(SYSTEM, { name: 'synthetic 1e5', synthetic: true }, stream, {
			onChunk: () => {
				consumedChunks++;
				maxAhead = Math.max(maxAhead, produced - consumedChunks);
			}
		});
		const ms = performance.now() - started;
		expect(out.state).toBe('ready');
		expect(out.rowCount).toBe(100_000);
		expect(galaxyCount(out.catalogId)).toBe(100_000);
		expect(consumedChunks).toBe(50);
		expect(out.report.bytes).toBe(producedBytes);
		// Pull-based: the source is at most a couple of chunks (≈ 2 × 150 kB) ahead of the parser, never the whole 7 MB.
		expect(maxAhead).toBeLessThanOrEqual(2);
		expect(producedBytes).toBeGreaterThan(5_000_000);
		const row = database.select().from(table.galaxy).where(eq(table.galaxy.name, cat.id[54_321])).get()!;
		expect(row.row).toBe(54_321);
		expect(row.pixel).toBe(radecToNest(INDEX_ORDER, row.raDeg, row.decDeg));
		expect(row.raDeg).toBeCloseTo(cat.raDeg[54_321], 6);
		console.log(`import of 1e5 rows (${(producedBytes / 1e6).toFixed(1)} MB): ${ms.toFixed(0)} ms`);
	}, 60_000);
});

describe('the demo catalogue', () => {
	it('seeds 20,000 synthetic galaxies once, labelled synthetic, quickly', async () => {
		expect.hasAssertions();
		const { seedDemoCatalog, DEMO_CATALOG } = await import('../../../../seeds/demo');
		const started = performance.now();
		expect(await seedDemoCatalog(database)).toEqual({ created: true });
		const ms = performance.now() - started;
		expect(await seedDemoCatalog(database)).toEqual({ created: false });
		const cats = listCatalogs();
		expect(cats).toHaveLength(1);
		expect(cats[0]).toMatchObject({ name: DEMO_CATALOG.name, synthetic: true, state: 'ready', rowCount: 20_000, weightSource: 'weight' });
		expect(cats[0].name).toMatch(/synthetic/i);
		expect(galaxyCount(cats[0].id)).toBe(20_000);
		// The e2e server seeds on every start: keep it to a couple of seconds on a shared 2-core machine.
		expect(ms).toBeLessThan(3000);
		console.log(`demo catalogue seeded in ${ms.toFixed(0)} ms`);
	});
});
