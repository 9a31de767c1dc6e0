import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import notice from './notice.ts';
import skymap from './skymap.ts';

const dir = fileURLToPath(new URL('../../../tests/fixtures/notices/', import.meta.url));
/** astropy 5.2.1 / healpy 1.16.1 figures for the map the initial notice carries (skymap-demo.astropy.json). */
const astropy = JSON.parse(readFileSync(dir + 'skymap-demo.astropy.json', 'utf8')).maps[0] as { area50Deg2: number; area90Deg2: number };

describe('strainline notice: VOEvent and JSON alike', () => {
	it('prints the same shape for a JSON notice as for the VOEvent of the same story', async () => {
		expect.hasAssertions();
		const xml = (await notice.run([dir + 'bns-initial.xml'], {})).json as Record<string, unknown>;
		const fromJson = (await notice.run([dir + 'json/bns-initial.json'], {})).json as Record<string, unknown>;
		// The JSON notice adds two optional fields the VOEvent fixture does not give.
		expect(Object.keys(fromJson)).toEqual([...Object.keys(xml), 'significant', 'instruments']);
		expect(fromJson).toMatchObject({ sourceEventId: xml.sourceEventId, kind: 'initial', eventTime: xml.eventTime, classification: xml.classification });
	});

	it('reads an update without a map and a retraction; the text names the embedded map', async () => {
		expect.hasAssertions();
		expect((await notice.run([dir + 'json/bns-update.json'], {})).json).toMatchObject({ kind: 'update', far: 1.2e-12 });
		expect((await notice.run([dir + 'json/retraction.json'], {})).json).toMatchObject({ kind: 'retraction', eventTime: null });
		expect((await notice.run([dir + 'json/bns-initial.json'], {})).text).toContain('sky map inside the notice, 83693 bytes');
	});

	it('refuses by size before reading: --max-bytes applies to the notice without its map', async () => {
		expect.hasAssertions();
		await expect(notice.run([dir + 'json/bns-update.json'], { 'max-bytes': '100' })).rejects.toThrow(/larger than the 100-byte limit/);
		await expect(notice.run([dir + 'bns-initial.xml'], { 'max-bytes': '1000' })).rejects.toThrow(/larger than the 1000-byte limit/);
	});

	it('as a program: `cli notice FILE.json --json` prints the notice as JSON', () => {
		expect.hasAssertions();
		const out = execFileSync('npm', ['run', '--silent', 'cli', '--', 'notice', dir + 'json/retraction.json', '--json'], { encoding: 'utf8' });
		expect(JSON.parse(out)).toEqual({
			ivorn: 'ivo://json-notice/SX30041315#retraction-2030-04-13T15:40:00.000Z',
			role: 'observation',
			authoredAt: '2030-04-13T15:40:00.000Z',
			eventTime: null,
			kind: 'retraction',
			sourceEventId: 'SX30041315',
			far: null,
			classification: null,
			properties: null,
			skymapUrl: null,
			citations: []
		});
	});
});

describe('strainline skymap NOTICE.json', () => {
	it('analyses the embedded map: the same figures as the FITS file, and as astropy/healpy give', async () => {
		expect.hasAssertions();
		const embedded = (await skymap.run([dir + 'json/bns-initial.json'], {})).json as { area50: number; area90: number };
		const file = (await skymap.run([dir + 'skymap-demo.multiorder.fits.gz'], {})).json;
		expect(embedded).toEqual(file);
		expect(embedded.area90 / astropy.area90Deg2).toBeCloseTo(1, 6);
		expect(embedded.area50 / astropy.area50Deg2).toBeCloseTo(1, 6);
	});

	it('says so when the notice carries no map', async () => {
		expect.hasAssertions();
		await expect(skymap.run([dir + 'json/bns-update.json'], {})).rejects.toThrow('this update notice carries no sky map');
	});
});
