/**
 * Chat webhooks: the kinds of message a team-chat room can be sent, and the messages themselves,
 * written from plain facts. Shared by the server and the settings page. Pure: no I/O, no server imports.
 *
 * The body is the common incoming-webhook JSON `{ "text": "...", "blocks": [...] }`: `text` alone is
 * enough for the products that ignore blocks.
 */
import { WEBHOOK_TEXT_MAX } from './limits.ts';

export const WEBHOOK_KINDS = ['alert.significant', 'alert.update', 'alert.retraction', 'candidate.kilonova-like', 'candidate.classified', 'event.closed'] as const;
export type WebhookKind = (typeof WEBHOOK_KINDS)[number];

export const WEBHOOK_KIND_LABELS: Record<WebhookKind, string> = {
	'alert.significant': 'New significant alert',
	'alert.update': 'Update to a significant alert',
	'alert.retraction': 'Retraction',
	'candidate.kilonova-like': 'Kilonova-like candidate',
	'candidate.classified': 'Candidate classified',
	'event.closed': 'Event closed'
};

export interface WebhookBlock {
	type: 'section';
	text: { type: 'mrkdwn'; text: string };
}

export interface WebhookBody {
	text: string;
	blocks?: WebhookBlock[];
}

/** What a message says, before it is put in the body: a headline, a few facts, and the page to open. */
export interface WebhookFacts {
	headline: string;
	lines: string[];
	link: string;
}

function clip(s: string, max: number): string {
	return s.length <= max ? s : `${s.slice(0, max - 1)}…`;
}

/** The body for `facts`: the text alone reads well; one block repeats it for products that show blocks. */
export function webhookBody(facts: WebhookFacts): WebhookBody {
	const text = clip([facts.headline, ...facts.lines, `Open: ${facts.link}`].join('\n'), WEBHOOK_TEXT_MAX);
	const blockText = clip([`*${facts.headline}*`, ...facts.lines, `<${facts.link}|Open in Strainline>`].join('\n'), WEBHOOK_TEXT_MAX);
	return { text, blocks: [{ type: 'section', text: { type: 'mrkdwn', text: blockText } }] };
}

/** A false-alarm rate in Hz as "1 per N years" (one year = 365.25 days, the Julian year). */
export function farInWords(farHz: number | null): string | null {
	if (farHz === null || !(farHz > 0)) return null;
	const perYear = farHz * 365.25 * 86400;
	if (perYear >= 1) return `${perYear.toPrecision(2)} per year`;
	const years = 1 / perYear;
	return `1 per ${years >= 100 ? Math.round(years).toLocaleString('en-GB') : years.toPrecision(2)} years`;
}
