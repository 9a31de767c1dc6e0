/**
 * The coordinators' follow-up policy (one row, id = 1) and the verdicts it gives the events.
 */
import { eq, ne } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { record, type Actor } from '../platform/realtime';
import { DEFAULT_TRIAGE_POLICY, evaluateTriage, type TriageFacts, type TriagePolicyInput } from '../../alerts/triage.ts';
import { numberField } from '../../validation';

export type { TriagePolicyInput };

/** The policy row, created with the table's defaults on first use. */
export function getPolicy(): table.TriagePolicy {
	const row = db.select().from(table.triagePolicy).where(eq(table.triagePolicy.id, 1)).get();
	if (row) return row;
	db.insert(table.triagePolicy).values({ id: 1 }).onConflictDoNothing().run();
	return db.select().from(table.triagePolicy).where(eq(table.triagePolicy.id, 1)).get()!;
}

export function policyInput(row: table.TriagePolicy = getPolicy()): TriagePolicyInput {
	return {
		maxFarPerYear: row.maxFarPerYear,
		minProbNS: row.minProbNS,
		maxArea90Deg2: row.maxArea90Deg2,
		maxDistanceMpc: row.maxDistanceMpc,
		requireObservationRole: row.requireObservationRole
	};
}

/** Form schema of the policy editor. */
export const policyForm = z.object({
	maxFarPerYear: numberField('a false-alarm rate', 0, 1e6, { exclusiveMin: true }),
	minProbNS: numberField('a probability', 0, 1),
	maxArea90Deg2: numberField('an area', 0, 41253, { exclusiveMin: true }),
	maxDistanceMpc: numberField('a distance', 0, 1e5, { exclusiveMin: true }),
	requireObservationRole: z
		.string()
		.optional()
		.transform((v) => v === 'on' || v === 'true' || v === '1')
});

/** The facts triage looks at, from the event row and its latest analysed sky map. */
export function factsOf(event: table.GwEvent, summary: table.SkymapSummary | null): TriageFacts {
	return {
		role: event.role,
		retracted: event.state === 'retracted',
		farHz: event.farHz,
		classification: event.classification,
		properties: event.properties,
		area90Deg2: summary?.area90 ?? null,
		distanceMpc: summary?.distanceMean ?? null
	};
}

function latestSummary(event: table.GwEvent): table.SkymapSummary | null {
	if (!event.latestSkymapId) return null;
	return db.select({ summary: table.skymap.summary }).from(table.skymap).where(eq(table.skymap.id, event.latestSkymapId)).get()?.summary ?? null;
}

/** Verdict of one event under a policy (the current one by default). */
export function verdictFor(event: table.GwEvent, policy: TriagePolicyInput = policyInput()): table.TriageVerdict {
	return evaluateTriage(policy, factsOf(event, latestSummary(event)));
}

/**
 * Save new thresholds and re-evaluate every event that is not retracted (closed events keep a
 * fresh verdict too, so the list stays truthful). Returns the number of events re-evaluated.
 */
export function updatePolicy(actor: Actor, input: TriagePolicyInput, now = new Date()): number {
	getPolicy();
	const count = db.transaction((tx) => {
		tx.update(table.triagePolicy)
			.set({ ...input, updatedBy: actor.userId, updatedAt: now })
			.where(eq(table.triagePolicy.id, 1))
			.run();
		const events = tx.select().from(table.gwEvent).where(ne(table.gwEvent.state, 'retracted')).all();
		for (const e of events) {
			tx.update(table.gwEvent).set({ triage: verdictFor(e, input) }).where(eq(table.gwEvent.id, e.id)).run();
		}
		return events.length;
	});
	record(actor, 'triage.policy-changed', 'board', { policy: input });
	return count;
}

export { DEFAULT_TRIAGE_POLICY };
