import { asc, eq } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { randomId } from './auth';
import { record, type Actor } from '../platform/realtime';
import { numberField } from '../../validation';
import { InputError } from '../platform/errors';

/** Form schema: what a telescope needs for planning. Limits are physical, not preferences. */
export const telescopeInput = z
	.object({
		name: z.string({ error: 'Enter a name.' }).trim().min(1, 'Enter a name.').max(60, 'At most 60 characters.'),
		teamId: z.string({ error: 'Choose a team.' }).min(1, 'Choose a team.'),
		siteName: z.string({ error: 'Enter the site.' }).trim().min(1, 'Enter the site.').max(80, 'At most 80 characters.'),
		latitudeDeg: numberField('a latitude', -90, 90),
		longitudeDeg: numberField('a longitude', -180, 180),
		elevationM: numberField('an elevation', -500, 6000),
		apertureM: numberField('an aperture', 0, 40, { exclusiveMin: true }),
		fovShape: z.enum(table.FOV_SHAPES, { error: 'Choose circle or rectangle.' }),
		fovWidthDeg: numberField('a field width', 0, 60, { exclusiveMin: true }),
		fovHeightDeg: z.string().optional(),
		filters: z
			.string({ error: 'List the filters.' })
			.trim()
			.min(1, 'List at least one filter.')
			.max(200, 'At most 200 characters.')
			.transform((s) => [...new Set(s.split(/[\s,]+/).filter(Boolean))])
			.refine((f) => f.length > 0 && f.every((x) => /^[A-Za-z0-9_'+-]{1,12}$/.test(x)), {
				message: 'Filters are short names separated by commas, e.g. g, r, i.'
			}),
		limitingMag: numberField('a limiting magnitude', 5, 32),
		limitingMagExposureS: numberField('an exposure', 0, 86400, { exclusiveMin: true }),
		minAltitudeDeg: numberField('an altitude limit', 0, 89),
		maxAirmass: numberField('an airmass limit', 1, 40),
		minSunSeparationDeg: numberField('a Sun separation', 0, 180),
		minMoonSeparationDeg: numberField('a Moon separation', 0, 180),
		slewOverheadS: numberField('a slew overhead', 0, 3600),
		robotic: z
			.string()
			.optional()
			.transform((v) => v === 'on' || v === 'true')
	})
	.transform((t, ctx) => {
		let height = t.fovWidthDeg;
		if (t.fovShape === 'rectangle') {
			const h = Number(t.fovHeightDeg?.trim() ?? '');
			if (!t.fovHeightDeg?.trim() || !Number.isFinite(h) || h <= 0 || h > 60) {
				ctx.addIssue({ code: 'custom', path: ['fovHeightDeg'], message: 'A rectangle needs a height greater than 0 and at most 60.' });
				return z.NEVER;
			}
			height = h;
		}
		return { ...t, fovHeightDeg: height };
	});

export type TelescopeInput = z.infer<typeof telescopeInput>;

export class TelescopeError extends InputError {}

export function listTelescopes() {
	return db
		.select({ telescope: table.telescope, teamName: table.team.name })
		.from(table.telescope)
		.innerJoin(table.team, eq(table.team.id, table.telescope.teamId))
		.orderBy(asc(table.team.name), asc(table.telescope.name))
		.all()
		.map((r) => ({ ...r.telescope, teamName: r.teamName }));
}

export function getTelescope(id: string) {
	return db.select().from(table.telescope).where(eq(table.telescope.id, id)).get() ?? null;
}

function checkRefs(input: TelescopeInput, id?: string) {
	if (!db.select({ id: table.team.id }).from(table.team).where(eq(table.team.id, input.teamId)).get())
		throw new TelescopeError('Unknown team.', 'teamId');
	const clash = db.select({ id: table.telescope.id }).from(table.telescope).where(eq(table.telescope.name, input.name)).get();
	if (clash && clash.id !== id) throw new TelescopeError('A telescope with this name exists.', 'name');
}

export function createTelescope(actor: Actor, input: TelescopeInput & { isDemo?: boolean }): string {
	checkRefs(input);
	const id = randomId();
	db.insert(table.telescope).values({ id, ...input }).run();
	record(actor, 'telescope.created', 'board', { telescopeId: id, name: input.name });
	return id;
}

export function updateTelescope(actor: Actor, id: string, input: TelescopeInput): void {
	if (!getTelescope(id)) throw new TelescopeError('No such telescope.');
	checkRefs(input, id);
	db.update(table.telescope).set({ ...input, updatedAt: new Date() }).where(eq(table.telescope.id, id)).run();
	record(actor, 'telescope.updated', 'board', { telescopeId: id, name: input.name });
}
