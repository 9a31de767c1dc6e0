/**
 * Scenarios: invented alert sequences kept as data in ./scenarios/*.json, rendered into
 * VOEvent notices and sky maps. Rendering is deterministic for a given epoch, seed and cycle.
 */
import { mkdirSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { z } from 'zod';
import { BROKER_IVORN, buildNoticeXml } from './notices.ts';
import { buildJsonNotice } from '../src/lib/alerts/notice-json.ts';
import { gaussian, mulberry32, seedFor } from './prng.ts';
import { generateSkymap, radecToVec, skymapToFits, type SkymapSpec } from './skymap.ts';
import { sunPosition } from '../src/lib/targeting/sun-moon.ts';

export const SCENARIO_DIR = fileURLToPath(new URL('./scenarios/', import.meta.url));
const SECONDS_PER_JULIAN_YEAR = 365.25 * 86400;

const probability = z.number().min(0).max(1);
const stepSchema = z.object({
	delaySeconds: z.number().min(0),
	eventId: z.string().regex(/^SX[A-Z0-9]+$/, 'invented ids start with SX'),
	kind: z.enum(['preliminary', 'initial', 'update', 'retraction']),
	role: z.enum(['observation', 'test', 'utility']).default('observation'),
	/** Event time relative to the scenario's epoch. */
	eventOffsetSeconds: z.number().default(-30),
	farPerYear: z.number().nonnegative().optional(),
	classification: z.object({ BNS: probability, NSBH: probability, BBH: probability, Terrestrial: probability }).optional(),
	properties: z.object({ HasNS: probability, HasRemnant: probability, HasMassGap: probability }).optional(),
	skymap: z
		.object({
			components: z
				.array(
					z.object({
						raDeg: z.number().min(0).max(360),
						decDeg: z.number().min(-90).max(90),
						widthDeg: z.number().min(0.05).max(60),
						weight: z.number().positive().optional()
					})
				)
				.min(1),
			/** 1σ random shift of every centre, degrees (seeded). */
			jitterDeg: z.number().min(0).default(0),
			distance: z.object({
				meanMpc: z.number().positive(),
				stdMpc: z.number().positive(),
				gradientPerRad: z.number().optional()
			})
		})
		.optional(),
	/** Citations of earlier steps, by their index in this scenario. */
	cites: z.array(z.object({ step: z.number().int().min(0), cite: z.enum(['followup', 'supersedes', 'retraction']) })).default([]),
	description: z.string().optional(),
	/** Deliberately break the notice. */
	malformed: z.enum(['unclosed-tag', 'missing-event-id']).optional()
});

/**
 * Where the sky of a scenario lies when it is played. A fixed sky position sits next to the Sun
 * for part of every year, and then no telescope can follow the event up. With `nightSky`, every
 * map of the scenario is turned rigidly on the sphere so that `anchor` (as written in the steps)
 * lands at the antisolar right ascension at the play time plus `raOffsetDeg`, at `decDeg`: up
 * around local midnight from every site, and from both hemispheres when |decDeg| ≲ 20°.
 */
const placementSchema = z.object({
	anchor: z.object({ raDeg: z.number().min(0).max(360), decDeg: z.number().min(-90).max(90) }),
	decDeg: z.number().min(-60).max(60),
	/** Hours away from opposition, in degrees of RA (keeps several scenarios apart). */
	raOffsetDeg: z.number().min(-90).max(90).default(0)
});

export const scenarioSchema = z.object({
	name: z.string().regex(/^[a-z0-9-]+$/),
	description: z.string(),
	nightSky: placementSchema.optional(),
	steps: z.array(stepSchema).min(1)
});

export type SkyPlacement = z.infer<typeof placementSchema>;

const DEG = Math.PI / 180;

/** Right ascension opposite the Sun at `time`, degrees (the Sun from the project's own night.ts). */
export function antisolarRaDeg(time: Date): number {
	return (sunPosition({ latitudeDeg: 0, longitudeDeg: 0, elevationM: 0 }, time).raDeg + 180) % 360;
}

/**
 * The rotation of the sphere that takes `from` to `to` along the meridian route
 * Rz(α_to) · Ry(δ_from − δ_to) · Rz(−α_from), applied to a direction: shapes and separations
 * on the sky are kept (a mixture of blobs stays the same mixture).
 */
export function rotateSky(point: { raDeg: number; decDeg: number }, from: { raDeg: number; decDeg: number }, to: { raDeg: number; decDeg: number }) {
	let [x, y, z] = radecToVec(point.raDeg - from.raDeg, point.decDeg);
	const t = (from.decDeg - to.decDeg) * DEG;
	[x, z] = [x * Math.cos(t) + z * Math.sin(t), -x * Math.sin(t) + z * Math.cos(t)];
	const decDeg = Math.asin(Math.max(-1, Math.min(1, z))) / DEG;
	const raDeg = ((((Math.atan2(y, x) / DEG + to.raDeg) % 360) + 360) % 360);
	return { raDeg, decDeg };
}

/** Where a placement puts its anchor at `time`. */
export function placedAnchor(p: SkyPlacement, time: Date): { raDeg: number; decDeg: number } {
	return { raDeg: (((antisolarRaDeg(time) + p.raOffsetDeg) % 360) + 360) % 360, decDeg: p.decDeg };
}

export type Scenario = z.infer<typeof scenarioSchema>;
export type ScenarioStep = z.infer<typeof stepSchema>;

export function listScenarios(dir = SCENARIO_DIR): string[] {
	return readdirSync(dir)
		.filter((f) => f.endsWith('.json'))
		.map((f) => f.replace(/\.json$/, ''))
		.sort();
}

export function loadScenario(name: string, dir = SCENARIO_DIR): Scenario {
	if (!/^[a-z0-9-]+$/.test(name)) throw new Error(`bad scenario name "${name}"`);
	let raw: string;
	try {
		raw = readFileSync(join(dir, `${name}.json`), 'utf8');
	} catch {
		throw new Error(`no scenario "${name}" (have: ${listScenarios(dir).join(', ')})`);
	}
	const parsed = scenarioSchema.safeParse(JSON.parse(raw));
	if (!parsed.success) {
		const i = parsed.error.issues[0];
		throw new Error(`scenario ${name}: ${i.path.join('.')}: ${i.message}`);
	}
	for (const [i, s] of parsed.data.steps.entries()) {
		for (const c of s.cites) if (c.step >= i) throw new Error(`scenario ${name}: step ${i} cites a later step ${c.step}`);
	}
	return parsed.data;
}

export interface RenderedMap {
	name: string;
	/** Built on demand (a map takes tens of milliseconds). */
	build: () => Buffer;
}

export interface RenderedStep {
	/** Seconds after the previous step, before the speed factor. */
	delaySeconds: number;
	/** Seconds after the scenario's start, before the speed factor. */
	atSeconds: number;
	ivorn: string;
	sourceEventId: string;
	kind: ScenarioStep['kind'];
	xml: string;
	/**
	 * The same notice as a JSON notice with its map inside (built on demand). JSON has no role: a
	 * test or utility step's event id gets the mock prefix "M" (docs/notice-format.md).
	 */
	json: () => string;
	map: RenderedMap | null;
}

/** Detectors named in the broker's JSON notices (invented scenarios; the network's site codes). */
const DEMO_INSTRUMENTS = ['H1', 'L1', 'V1'];
/** "Significant" as the sender flags it: FAR below one per month (common practice for compact-binary alerts). */
const SIGNIFICANT_FAR_PER_YEAR = 12;

export interface RenderOptions {
	/** Start of the scenario; Who/Date = epoch + atSeconds / speed. A scenario with `nightSky` is placed opposite the Sun at this time. */
	epoch: Date;
	/** Base URL under which maps are served, e.g. http://127.0.0.1:8098 */
	httpBase: string;
	seed?: number;
	speed?: number;
	/** Repetition number when looping: ids get an "R{cycle}" suffix so every cycle is new. */
	cycle?: number;
}

export function renderScenario(sc: Scenario, o: RenderOptions): RenderedStep[] {
	const speed = o.speed ?? 1;
	const seed = o.seed ?? 1;
	const cycle = o.cycle ?? 0;
	const counters = new Map<string, number>();
	const ivorns: string[] = [];
	const out: RenderedStep[] = [];
	let at = 0;
	const base = o.httpBase.replace(/\/$/, '');
	sc.steps.forEach((s, i) => {
		at += s.delaySeconds;
		const eventId = cycle > 0 ? `${s.eventId}R${cycle}` : s.eventId;
		const n = (counters.get(eventId) ?? 0) + 1;
		counters.set(eventId, n);
		const ivorn = `${BROKER_IVORN}#${eventId}-${n}-${s.kind}`;
		ivorns.push(ivorn);
		const authoredAt = new Date(o.epoch.getTime() + (at * 1000) / speed).toISOString();
		const eventTime = new Date(o.epoch.getTime() + s.eventOffsetSeconds * 1000).toISOString();

		let map: RenderedMap | null = null;
		if (s.skymap) {
			const random = mulberry32(seedFor(seed, `${sc.name}:${i}:${cycle}`));
			const spec: SkymapSpec = {
				components: s.skymap.components.map((written) => {
					const c = sc.nightSky ? { ...written, ...rotateSky(written, sc.nightSky.anchor, placedAnchor(sc.nightSky, o.epoch)) } : written;
					const dDec = s.skymap!.jitterDeg * gaussian(random);
					const dRa = (s.skymap!.jitterDeg * gaussian(random)) / Math.max(0.1, Math.cos((c.decDeg * Math.PI) / 180));
					return {
						raDeg: (((c.raDeg + dRa) % 360) + 360) % 360,
						decDeg: Math.max(-89.9, Math.min(89.9, c.decDeg + dDec)),
						widthDeg: c.widthDeg,
						weight: c.weight
					};
				}),
				distance: s.skymap.distance
			};
			const name = `${eventId}-${n}.multiorder.fits.gz`;
			map = {
				name,
				build: () => skymapToFits(generateSkymap(spec), { object: eventId, dateObs: eventTime.replace(/Z$/, '') })
			};
		}
		let xml = buildNoticeXml({
			ivorn,
			role: s.role,
			authoredAt,
			eventTime: s.kind === 'retraction' ? null : eventTime,
			sourceEventId: eventId,
			kind: s.kind,
			farHz: s.farPerYear === undefined ? null : s.farPerYear / SECONDS_PER_JULIAN_YEAR,
			classification: s.classification ?? null,
			properties: s.properties ?? null,
			skymapUrl: map ? `${base}/skymaps/${map.name}` : null,
			citations: s.cites.map((c) => ({ ivorn: ivorns[c.step], cite: c.cite })),
			description: s.description
		});
		if (s.malformed === 'unclosed-tag') xml = xml.replace('  </What>\n', '');
		if (s.malformed === 'missing-event-id') xml = xml.replace(/\s*<Param name="SourceEventId"[^>]*\/>/, '');
		const builtMap = map;
		const json = () => {
			let text = buildJsonNotice({
				supereventId: s.role === 'observation' ? eventId : `M${eventId}`,
				kind: s.kind,
				createdAt: authoredAt,
				event:
					s.kind === 'retraction'
						? null
						: {
								time: eventTime,
								farHz: s.farPerYear === undefined ? null : s.farPerYear / SECONDS_PER_JULIAN_YEAR,
								significant: s.farPerYear !== undefined && s.farPerYear < SIGNIFICANT_FAR_PER_YEAR,
								instruments: DEMO_INSTRUMENTS,
								classification: s.classification ?? {},
								properties: s.properties ?? null,
								skymap: builtMap ? builtMap.build() : null
							}
			});
			// The JSON counterparts of the broken XML: a document cut short, a missing id.
			if (s.malformed === 'unclosed-tag') text = text.trimEnd().replace(/}$/, '');
			if (s.malformed === 'missing-event-id') text = text.replace(/\s*"superevent_id": "[^"]*",/, '');
			return text;
		};
		out.push({ delaySeconds: s.delaySeconds, atSeconds: at, ivorn, sourceEventId: eventId, kind: s.kind, xml, json, map });
	});
	return out;
}

/**
 * Write a scenario's notices (NN-<ivorn fragment>.xml, or .json with `format: 'json'`, the map
 * inside) and, for VOEvents, the sky maps they name into `dir`.
 */
export function writeScenario(name: string, dir: string, o: RenderOptions & { format?: 'voevent' | 'json' }): string[] {
	const steps = renderScenario(loadScenario(name), o);
	mkdirSync(dir, { recursive: true });
	const written: string[] = [];
	steps.forEach((s, i) => {
		const asJson = o.format === 'json';
		const file = join(dir, `${String(i + 1).padStart(2, '0')}-${s.ivorn.split('#')[1]}.${asJson ? 'json' : 'xml'}`);
		writeFileSync(file, asJson ? s.json() : s.xml);
		written.push(file);
		if (s.map && !asJson) {
			const mapFile = join(dir, s.map.name);
			writeFileSync(mapFile, s.map.build());
			written.push(mapFile);
		}
	});
	return written;
}
