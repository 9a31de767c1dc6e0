/**
 * Chat webhooks: the coordinators' list of incoming-webhook addresses, the outbox of messages for
 * them, and delivery. Messages are queued by `messages.ts` (reactions to live actions) and sent off
 * the request path by the `webhooks` service: at once after queueing, and every WEBHOOK_CHECK_MS
 * for retries. A failed attempt is tried again after a doubling wait, up to WEBHOOK_MAX_ATTEMPTS.
 */
import { request as httpRequest } from 'node:http';
import { request as httpsRequest } from 'node:https';
import { and, asc, count, desc, eq, inArray, lte, or, isNull } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { InputError } from '../platform/errors';
import { randomId } from '../people/auth';
import { checkedLookup, checkOutboundUrl, type LoopbackException } from '../platform/outbound';
import { fakeWebhookPort, startFakeWebhook } from '../platform/fake-webhook';
import { hostAllowance } from '../alerts/skymap-fetch';
import { every } from '../platform/periodic';
import { restartService, runningService, type Running } from '../platform/services';
import { WEBHOOK_KINDS, type WebhookBody, type WebhookKind } from '../../webhooks';
import { WEBHOOKS_MAX, WEBHOOK_MAX_ATTEMPTS, WEBHOOK_NAME_MAX, WEBHOOK_RETRY_BASE_S, WEBHOOK_TIMEOUT_S, WEBHOOK_URL_MAX } from '../../limits';

export const WEBHOOK_CHECK_MS = 15_000;

export class WebhookError extends InputError {}

/** The fake receiver, when it runs: the one loopback address a webhook may use. */
function loopbackException(): LoopbackException | null {
	const port = fakeWebhookPort();
	return port === null ? null : { port };
}

/**
 * Start the local fake receiver unless FAKE_WEBHOOK_PORT=off, then point the webhooks that target
 * it at the port it got (`repointFakeReceiverWebhooks`).
 */
export async function startFakeReceiver(): Promise<number | null> {
	if (config.fakeWebhookPort === null) return null;
	const port = await startFakeWebhook(config.fakeWebhookPort);
	if (config.fakeWebhookPort !== 0 && port !== config.fakeWebhookPort) console.warn(`[webhooks] port ${config.fakeWebhookPort} is taken: the local fake receiver listens on ${port}`);
	const moved = repointFakeReceiverWebhooks(port);
	if (moved) console.log(`[webhooks] ${moved} webhook${moved === 1 ? '' : 's'} for the local fake receiver now use${moved === 1 ? 's' : ''} port ${port}`);
	return port;
}

const LOOPBACK_HOSTS = new Set(['127.0.0.1', 'localhost']);

/** Whether `url` is a plain-http loopback address, the only form the fake receiver's webhooks take. */
function targetsFakeReceiver(url: string): URL | null {
	try {
		const u = new URL(url);
		return u.protocol === 'http:' && LOOPBACK_HOSTS.has(u.hostname) && !u.username && !u.password ? u : null;
	} catch {
		return null;
	}
}

/**
 * Point every webhook addressed to the local fake receiver at `port`, the one it bound. The demo
 * stores its room's address before the app starts, with the port asked for; when that is 0 (any
 * free port) or taken, the receiver listens elsewhere and the stored address leads nowhere.
 * Only plain-http loopback addresses are rewritten: no other webhook can hold one (an address
 * typed in must be https to a public host, or the fake receiver itself), so a real chat
 * product's address is never touched. Returns how many were changed.
 */
export function repointFakeReceiverWebhooks(port: number, now = new Date()): number {
	let changed = 0;
	for (const hook of db.select({ id: table.chatWebhook.id, url: table.chatWebhook.url }).from(table.chatWebhook).all()) {
		const u = targetsFakeReceiver(hook.url);
		if (!u || Number(u.port || 80) === port) continue;
		u.port = String(port);
		db.update(table.chatWebhook).set({ url: u.href, updatedAt: now }).where(and(eq(table.chatWebhook.id, hook.id), eq(table.chatWebhook.url, hook.url))).run();
		changed++;
	}
	return changed;
}

/** The address with its secret part hidden: scheme, host and the first path segment, then "…". */
export function maskedUrl(url: string): string {
	try {
		const u = new URL(url);
		const first = u.pathname.split('/').filter(Boolean)[0];
		return `${u.protocol}//${u.host}/${first ? `${first}/` : ''}…`;
	} catch {
		return '…';
	}
}

export interface WebhookInput {
	name: string;
	url: string;
	kinds: WebhookKind[];
}

async function checkInput(input: WebhookInput): Promise<WebhookInput> {
	const name = input.name.trim();
	const url = input.url.trim();
	if (!name) throw new WebhookError('Give the webhook a name, such as the chat room it posts to.', 'name');
	if (name.length > WEBHOOK_NAME_MAX) throw new WebhookError(`The name is too long: at most ${WEBHOOK_NAME_MAX} characters.`, 'name');
	if (!url) throw new WebhookError('Paste the incoming-webhook address the chat product gave you.', 'url');
	if (url.length > WEBHOOK_URL_MAX) throw new WebhookError(`The address is too long: at most ${WEBHOOK_URL_MAX} characters.`, 'url');
	const kinds = [...new Set(input.kinds)];
	if (kinds.some((k) => !(WEBHOOK_KINDS as readonly string[]).includes(k))) throw new WebhookError('Choose among the kinds of message offered.', 'kinds');
	if (kinds.length === 0) throw new WebhookError('Choose at least one kind of message to send.', 'kinds');
	const checked = await checkOutboundUrl(url, { field: 'url', fake: loopbackException() });
	const isFake = checked.protocol === 'http:';
	if (!isFake && config.webhookHosts.length && !hostAllowance(checked.hostname, config.webhookHosts)) {
		throw new WebhookError(`“${checked.hostname}” is not among the chat hosts this site allows (${config.webhookHosts.join(', ')}). Ask an administrator to add it to WEBHOOK_HOSTS.`, 'url');
	}
	return { name, url: checked.href, kinds };
}

export async function addWebhook(actor: { id: string }, input: WebhookInput): Promise<string> {
	const checked = await checkInput(input);
	const { n } = db.select({ n: count() }).from(table.chatWebhook).get()!;
	if (n >= WEBHOOKS_MAX) throw new WebhookError(`There are already ${WEBHOOKS_MAX} webhooks: remove one first.`);
	const id = randomId();
	db.insert(table.chatWebhook).values({ id, ...checked, createdBy: actor.id }).run();
	return id;
}

/** Change the kinds a webhook takes (the address is not shown again, so it is replaced by adding anew). */
export function setWebhookKinds(id: string, kinds: WebhookKind[], now = new Date()): void {
	const unique = [...new Set(kinds)];
	if (unique.length === 0) throw new WebhookError('Choose at least one kind of message, or remove the webhook.', 'kinds');
	if (unique.some((k) => !(WEBHOOK_KINDS as readonly string[]).includes(k))) throw new WebhookError('Choose among the kinds of message offered.', 'kinds');
	const res = db.update(table.chatWebhook).set({ kinds: unique, updatedAt: now }).where(eq(table.chatWebhook.id, id)).run();
	if (!res.changes) throw new WebhookError('That webhook no longer exists.');
}

export function removeWebhook(id: string): void {
	const res = db.delete(table.chatWebhook).where(eq(table.chatWebhook.id, id)).run();
	if (!res.changes) throw new WebhookError('That webhook no longer exists.');
}

/** Webhooks that take `kind`. */
export function webhooksFor(kind: WebhookKind): table.ChatWebhook[] {
	return db
		.select()
		.from(table.chatWebhook)
		.all()
		.filter((w) => w.kinds.includes(kind));
}

/**
 * Queue `body` for `webhookId` under `messageKey`. Returns false when that webhook already has a
 * message under this key (each message goes once per webhook).
 */
export function enqueue(webhookId: string, kind: WebhookKind | 'test', messageKey: string, body: WebhookBody, now = new Date(), noticeId: string | null = null): boolean {
	const res = db
		.insert(table.webhookDelivery)
		.values({ webhookId, kind, messageKey, body, noticeId, nextAttemptAt: now })
		.onConflictDoNothing({ target: [table.webhookDelivery.webhookId, table.webhookDelivery.messageKey] })
		.run();
	if (res.changes) kick();
	return res.changes > 0;
}

/** Whether `webhookId` was already told about this notice (as a new alert or an update). */
export function toldOfNotice(webhookId: string, noticeId: string): boolean {
	return Boolean(
		db
			.select({ id: table.webhookDelivery.id })
			.from(table.webhookDelivery)
			.where(and(eq(table.webhookDelivery.webhookId, webhookId), eq(table.webhookDelivery.noticeId, noticeId)))
			.get()
	);
}

/** Queue a test message for one webhook. */
export function sendTest(id: string, by: string, now = new Date()): void {
	const hook = db.select().from(table.chatWebhook).where(eq(table.chatWebhook.id, id)).get();
	if (!hook) throw new WebhookError('That webhook no longer exists.');
	enqueue(
		id,
		'test',
		`test:${now.getTime()}:${randomId().slice(0, 6)}`,
		{
			text: `Test message from Strainline, sent by ${by}. Messages for this room will look like this one.\nOpen: ${config.publicUrl}/admin/webhooks`,
			blocks: [{ type: 'section', text: { type: 'mrkdwn', text: `*Test message from Strainline*, sent by ${by}.\n<${config.publicUrl}/admin/webhooks|Webhook settings>` } }]
		},
		now
	);
}

// ───────────────────────────── Delivery ─────────────────────────────

export interface PostResult {
	status: number | null;
	error: string | null;
}

export type Poster = (url: string, body: WebhookBody) => Promise<PostResult>;

/** POST the body as JSON; redirects are not followed, and the connection goes to a checked address. */
export const postJson: Poster = (url, body) =>
	new Promise((resolve) => {
		const u = new URL(url);
		const payload = Buffer.from(JSON.stringify(body));
		const isFake = u.protocol === 'http:';
		const send = isFake ? httpRequest : httpsRequest;
		const req = send(
			u,
			{
				method: 'POST',
				headers: { 'content-type': 'application/json', 'content-length': payload.length, 'user-agent': 'Strainline-webhooks' },
				timeout: WEBHOOK_TIMEOUT_S * 1000,
				// The fake receiver is reached by its loopback address; everything else through the checked lookup.
				...(isFake ? {} : { lookup: checkedLookup() })
			},
			(res) => {
				res.resume();
				res.on('end', () => resolve({ status: res.statusCode ?? null, error: null }));
			}
		);
		req.on('timeout', () => req.destroy(new Error(`no answer within ${WEBHOOK_TIMEOUT_S} s`)));
		req.on('error', (e: NodeJS.ErrnoException) => resolve({ status: null, error: e.code === 'EBLOCKED' ? `refused: ${e.message}` : e.message }));
		req.end(payload);
	});

function describeStatus(status: number): string {
	if (status === 404 || status === 410) return `the chat product answered ${status}: the webhook address is no longer valid`;
	if (status === 401 || status === 403) return `the chat product answered ${status}: it refuses this address (revoked or wrong)`;
	if (status === 413) return 'the chat product answered 413: the message is too large';
	if (status === 429) return 'the chat product answered 429: too many messages, slowing down';
	if (status >= 300 && status < 400) return `the chat product answered ${status} (a redirect, which we do not follow)`;
	return `the chat product answered ${status}`;
}

/** Wait before attempt `attempts + 1`, after `attempts` failures: base × 2^(attempts − 1). */
export function retryDelayMs(attempts: number): number {
	return WEBHOOK_RETRY_BASE_S * 1000 * 2 ** Math.max(0, attempts - 1);
}

/**
 * Send every message that is due. Each is claimed before sending (its next try moved past the
 * timeout) so that an overlapping run never sends it twice. Returns how many were delivered.
 */
export async function deliverDue(now = new Date(), post: Poster = postJson): Promise<number> {
	const due = db
		.select({ d: table.webhookDelivery, url: table.chatWebhook.url })
		.from(table.webhookDelivery)
		.innerJoin(table.chatWebhook, eq(table.chatWebhook.id, table.webhookDelivery.webhookId))
		.where(and(eq(table.webhookDelivery.state, 'pending'), or(isNull(table.webhookDelivery.nextAttemptAt), lte(table.webhookDelivery.nextAttemptAt, now))))
		.orderBy(asc(table.webhookDelivery.id))
		.limit(100)
		.all();
	let delivered = 0;
	for (const { d, url } of due) {
		const lease = new Date(now.getTime() + (WEBHOOK_TIMEOUT_S + 5) * 1000);
		const claimed = db
			.update(table.webhookDelivery)
			.set({ nextAttemptAt: lease })
			.where(and(eq(table.webhookDelivery.id, d.id), eq(table.webhookDelivery.state, 'pending'), eq(table.webhookDelivery.attempts, d.attempts)))
			.run();
		if (!claimed.changes) continue;
		let result: PostResult;
		try {
			// Checked again at each attempt: a name may have come to point somewhere it must not.
			await checkOutboundUrl(url, { fake: loopbackException() });
			result = await post(url, d.body);
		} catch (e) {
			result = { status: null, error: e instanceof Error ? e.message : String(e) };
		}
		const attempts = d.attempts + 1;
		const ok = result.status !== null && result.status >= 200 && result.status < 300;
		const error = ok ? null : (result.error ?? describeStatus(result.status!));
		// A 4xx other than 408/429 will not get better by waiting: give up at once.
		const hopeless = result.status !== null && result.status >= 400 && result.status < 500 && result.status !== 408 && result.status !== 429;
		const giveUp = !ok && (hopeless || attempts >= WEBHOOK_MAX_ATTEMPTS);
		db.update(table.webhookDelivery)
			.set({
				attempts,
				lastStatus: result.status,
				lastError: error,
				lastAttemptAt: now,
				state: ok ? 'delivered' : giveUp ? 'failed' : 'pending',
				deliveredAt: ok ? now : null,
				nextAttemptAt: ok || giveUp ? null : new Date(now.getTime() + retryDelayMs(attempts))
			})
			.where(eq(table.webhookDelivery.id, d.id))
			.run();
		if (ok) delivered++;
		else console.warn(`[webhooks] message ${d.id} (${d.kind}), attempt ${attempts}: ${error}${giveUp ? '; giving up' : ''}`);
	}
	return delivered;
}

// ───────────────────────────── Reading ─────────────────────────────

export interface DeliveryView {
	id: number;
	kind: WebhookKind | 'test';
	text: string;
	state: table.WebhookDelivery['state'];
	attempts: number;
	lastStatus: number | null;
	lastError: string | null;
	lastAttemptAt: string | null;
	nextAttemptAt: string | null;
	deliveredAt: string | null;
	createdAt: string;
}

export interface WebhookView {
	id: string;
	name: string;
	maskedUrl: string;
	kinds: WebhookKind[];
	createdAt: string;
	recent: DeliveryView[];
}

/** Every webhook with its most recent deliveries, for the settings page. */
export function listWebhooks(recentPerHook = 8): WebhookView[] {
	const hooks = db.select().from(table.chatWebhook).orderBy(asc(table.chatWebhook.createdAt)).all();
	return hooks.map((h) => ({
		id: h.id,
		name: h.name,
		maskedUrl: maskedUrl(h.url),
		kinds: h.kinds,
		createdAt: h.createdAt.toISOString(),
		recent: db
			.select()
			.from(table.webhookDelivery)
			.where(eq(table.webhookDelivery.webhookId, h.id))
			.orderBy(desc(table.webhookDelivery.id))
			.limit(recentPerHook)
			.all()
			.map((d) => ({
				id: d.id,
				kind: d.kind,
				text: d.body.text.split('\n')[0],
				state: d.state,
				attempts: d.attempts,
				lastStatus: d.lastStatus,
				lastError: d.lastError,
				lastAttemptAt: d.lastAttemptAt?.toISOString() ?? null,
				nextAttemptAt: d.state === 'pending' ? (d.nextAttemptAt?.toISOString() ?? null) : null,
				deliveredAt: d.deliveredAt?.toISOString() ?? null,
				createdAt: d.createdAt.toISOString()
			}))
	}));
}

/** Try a failed message again from the start. */
export function retryDelivery(deliveryId: number, now = new Date()): void {
	const res = db
		.update(table.webhookDelivery)
		.set({ state: 'pending', attempts: 0, nextAttemptAt: now, lastError: null })
		.where(and(eq(table.webhookDelivery.id, deliveryId), inArray(table.webhookDelivery.state, ['failed'])))
		.run();
	if (!res.changes) throw new WebhookError('Only a message that failed can be sent again.');
	kick();
}

// ───────────────────────────── The service ─────────────────────────────

class WebhookService implements Running {
	private busy = false;
	private again = false;
	constructor(
		private readonly stopTimer: (() => void) | null,
		readonly post: Poster
	) {}
	/** Deliver now, off the caller's stack; a kick during a run makes the run go round once more. */
	kick(): void {
		if (this.busy) {
			this.again = true;
			return;
		}
		this.busy = true;
		setImmediate(() => {
			deliverDue(new Date(), this.post)
				.catch((e) => console.error('webhook delivery failed', e))
				.finally(() => {
					this.busy = false;
					if (this.again) {
						this.again = false;
						this.kick();
					}
				});
		});
	}
	stop(): void {
		this.stopTimer?.();
	}
}

function kick(): void {
	runningService<WebhookService>('webhooks')?.kick();
}

/**
 * Start delivering: at once when a message is queued, and every `everyMs` for retries (null: no
 * timer, for tests that call `deliverDue`; `kickOnQueue: false` leaves delivery to the test).
 */
export function installWebhooks(o: { everyMs?: number | null; post?: Poster; kickOnQueue?: boolean } = {}): () => void {
	const everyMs = o.everyMs === undefined ? WEBHOOK_CHECK_MS : o.everyMs;
	const post = o.post ?? postJson;
	return restartService('webhooks', () => {
		const stop = everyMs === null ? null : every(everyMs, () => deliverDue(new Date(), post), 'webhook delivery');
		const service = new WebhookService(stop, post);
		if (o.kickOnQueue === false) service.kick = () => {};
		return service;
	});
}
