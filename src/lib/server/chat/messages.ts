/**
 * What the chat rooms are told, and when: reactions to the live actions that already mark each
 * moment (a significant notice processed, a retraction, a kilonova-like candidate, a classification,
 * a closing), each queued once per webhook that takes its kind. Messages are short, in our words,
 * link to the app, and carry no secrets: no tokens, no private notes (the closer's note, a
 * classification's notes and hand-over notes stay in the app).
 */
import { eq } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { onRecorded } from '../platform/realtime';
import { restartService } from '../platform/services';
import { dominantClass } from '../../alerts/display';
import { LABEL_NAMES } from '../../candidates/labels';
import { CLOSE_REASON_LABELS, type CloseReason } from '../../event-view';
import { farInWords, webhookBody, type WebhookFacts, type WebhookKind } from '../../webhooks';
import { enqueue, toldOfNotice, webhooksFor } from './webhooks';

function eventRow(eventId: string) {
	return db.select().from(table.gwEvent).where(eq(table.gwEvent.id, eventId)).get();
}

function eventLink(eventId: string): string {
	return `${config.publicUrl}/events/${encodeURIComponent(eventId)}`;
}

function classLine(e: table.GwEvent): string | null {
	const best = dominantClass(e.classification);
	return best ? `Most probable source: ${best.name} (${Math.round(best.probability * 100)} %)` : null;
}

/** Queue `facts` for every webhook taking `kind`, once per `key`; returns how many were queued. */
function send(kind: WebhookKind, key: string, facts: WebhookFacts): number {
	const body = webhookBody(facts);
	return webhooksFor(kind).filter((h) => enqueue(h.id, kind, key, body)).length;
}

/**
 * A significant notice: the first for its event is announced as a new alert to every webhook
 * taking those; a later one (or one a webhook already announced) as an update.
 */
export function onSignificantNotice(eventId: string, noticeId: string, noticeKind: string): number {
	const e = eventRow(eventId);
	if (!e || e.role !== 'observation') return 0;
	const facts = (headline: string): WebhookFacts => ({
		headline,
		lines: [classLine(e), farInWords(e.farHz) && `False-alarm rate: ${farInWords(e.farHz)}`, `Notice: ${noticeKind}`].filter((l): l is string => Boolean(l)),
		link: eventLink(eventId)
	});
	const firstBody = webhookBody(facts(`New significant alert: ${e.sourceEventId}`));
	const updateBody = webhookBody(facts(`Update to ${e.sourceEventId}`));
	let queued = 0;
	const firstTakers = new Set(webhooksFor('alert.significant').map((h) => h.id));
	const now = new Date();
	for (const hook of db.select().from(table.chatWebhook).all()) {
		if (toldOfNotice(hook.id, noticeId)) continue;
		const announced = firstTakers.has(hook.id) && enqueue(hook.id, 'alert.significant', `alert:${eventId}`, firstBody, now, noticeId);
		if (announced) queued++;
		else if (hook.kinds.includes('alert.update') && enqueue(hook.id, 'alert.update', `notice:${noticeId}`, updateBody, now, noticeId)) queued++;
	}
	return queued;
}

export function onRetracted(eventId: string, reason: string | null): number {
	const e = eventRow(eventId);
	if (!e || e.role !== 'observation') return 0;
	return send('alert.retraction', `retracted:${eventId}`, {
		headline: `Retracted: ${e.sourceEventId}`,
		lines: [
			'The source withdrew this alert. Stop observations of it, closing down as your observatory’s rules say.',
			reason ? `Reason given: ${reason.slice(0, 200)}` : null
		].filter((l): l is string => Boolean(l)),
		link: eventLink(eventId)
	});
}

function candidateLink(eventId: string, name: string): string {
	return `${eventLink(eventId)}/candidates/${encodeURIComponent(name)}`;
}

export function onKilonovaLike(c: { candidateId: string; eventId: string; name: string; credibleLevel: number | null; reasons: string[] }): number {
	const e = eventRow(c.eventId);
	if (!e || e.role !== 'observation') return 0;
	return send('candidate.kilonova-like', `kilonova:${c.candidateId}`, {
		headline: `Kilonova-like candidate ${c.name} for ${e.sourceEventId}`,
		lines: [
			c.credibleLevel !== null ? `Inside the ${Math.round(c.credibleLevel * 100)} % credible region` : null,
			...c.reasons.slice(0, 4).map((r) => `• ${r.slice(0, 160)}`)
		].filter((l): l is string => Boolean(l)),
		link: candidateLink(c.eventId, c.name)
	});
}

export function onClassified(c: { classificationId: string; candidateId: string; eventId: string; name: string; label: keyof typeof LABEL_NAMES; confidence: string; redshift: number | null }): number {
	const e = eventRow(c.eventId);
	if (!e || e.role !== 'observation') return 0;
	return send('candidate.classified', `classification:${c.classificationId}`, {
		headline: `${c.name} (${e.sourceEventId}) classified: ${LABEL_NAMES[c.label]}`,
		lines: [`Confidence: ${c.confidence}`, c.redshift !== null ? `Redshift: ${c.redshift}` : null].filter((l): l is string => Boolean(l)),
		link: candidateLink(c.eventId, c.name)
	});
}

export function onClosed(eventId: string, reason: string, by: string): number {
	const e = eventRow(eventId);
	if (!e || e.role !== 'observation' || !e.closedAt) return 0;
	const why = CLOSE_REASON_LABELS[reason as CloseReason]?.short ?? reason;
	return send('event.closed', `closed:${eventId}:${e.closedAt.getTime()}`, {
		headline: `Closed: ${e.sourceEventId} (${why})`,
		lines: [`Closed by ${by}. Its record is in the archive.`],
		link: `${eventLink(eventId)}/record`
	});
}

/** React to the live actions (service `chat-messages`); installing twice replaces the first. */
export function installChatMessages(): () => void {
	return restartService('chat-messages', () => {
		const offs = [
			onRecorded('notice.processed', (p) => {
				if (p.significant && p.role === 'observation') onSignificantNotice(p.eventId, p.noticeId, p.kind);
			}),
			onRecorded('event.retracted', (p) => void onRetracted(p.eventId, p.reason)),
			onRecorded('candidate.kilonova-like', (p) => void onKilonovaLike(p)),
			onRecorded('candidate.classified', (p) => void onClassified(p)),
			onRecorded('event.closed', (p) => void onClosed(p.eventId, p.reason, p.by))
		];
		return { stop: () => offs.forEach((off) => off()) };
	});
}
