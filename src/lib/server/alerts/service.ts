/**
 * The alert service of one server process: the VTP listener (when `VTP_BROKER` is set), the
 * inbox commit it acks on, processing after the ack, back-fill from the broker's archive on
 * every (re)connection, and a periodic retry of inbox rows whose processing did not finish.
 */
import { desc, inArray } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { runningService, service, stopService } from '../platform/services';
import { SYSTEM, type Actor } from '../platform/realtime';
import type { SkymapFetchOptions } from './skymap-fetch';
import { backfillFromArchive, parseBrokerAddress, VtpListener, type ListenerOptions, type ListenerStatus } from './listener';
import type { NoticeFormat } from '../../alerts/notice-json.ts';
import { commitNotice, processInbox, retryPending, retrySkymaps, type CommitResult, type InboxVia, type IngestOutcome } from './ingest';

export type LogFn = (level: 'info' | 'warn' | 'error', message: string) => void;

export interface AlertsServiceOptions {
	/** `host:port`; null = no listener. Default: `VTP_BROKER`. */
	broker?: string | null;
	/** Archive base URL, "auto" (the broker's host, VTP port − 1, as the fake broker lays it out) or null. Default: `VTP_ARCHIVE_URL`. */
	archiveUrl?: string | null;
	retryIntervalMs?: number;
	/** How far before the last notice received the back-fill starts (overlap on purpose: dedupe is by IVORN). */
	backfillOverlapMs?: number;
	/** With an empty inbox, how far back the first back-fill reaches. */
	backfillInitialMs?: number;
	/** Read the archive this often besides on (re)connection; 0 = only then. Default: `VTP_ARCHIVE_POLL_S`. */
	archivePollMs?: number;
	fetch?: SkymapFetchOptions;
	listener?: Partial<Omit<ListenerOptions, 'host' | 'port' | 'commit'>>;
	log?: LogFn;
}

const defaultLog: LogFn = (level, message) => {
	const line = `[alerts] ${message}`;
	if (level === 'error') console.error(line);
	else if (level === 'warn') console.warn(line);
	else console.log(line);
};

/** Archive base URL from the option value and the broker address. */
export function archiveBaseUrl(archive: string | null | undefined, broker: { host: string; port: number } | null): string | null {
	if (!archive) return null;
	if (archive !== 'auto') return archive;
	if (!broker) return null;
	const host = broker.host.includes(':') ? `[${broker.host}]` : broker.host;
	return `http://${host}:${broker.port - 1}`;
}

export class AlertsService {
	readonly listener: VtpListener | null;
	readonly archiveUrl: string | null;
	private readonly opts: AlertsServiceOptions;
	private readonly log: LogFn;
	private readonly working = new Set<Promise<unknown>>();
	private retryTimer: NodeJS.Timeout | null = null;
	private pollTimer: NodeJS.Timeout | null = null;
	private backfilling: Promise<number> | null = null;
	private stopped = false;
	lastBackfill: { at: string; committed: number; error: string | null } | null = null;

	constructor(opts: AlertsServiceOptions = {}) {
		this.opts = opts;
		this.log = opts.log ?? defaultLog;
		const brokerText = opts.broker === undefined ? config.alerts.vtpBroker : opts.broker;
		const broker = brokerText ? parseBrokerAddress(brokerText) : null;
		this.archiveUrl = archiveBaseUrl(opts.archiveUrl === undefined ? config.alerts.vtpArchiveUrl : opts.archiveUrl, broker);
		this.listener = broker
			? new VtpListener({
					host: broker.host,
					port: broker.port,
					identity: 'ivo://strainline.invalid/alerts',
					log: this.log,
					...opts.listener,
					commit: async (xml) => {
						// VTP is an XML transport: whatever arrives on it is read as a VOEvent.
						this.commit(xml, 'vtp', 'voevent');
					}
				})
			: null;
		this.listener?.on('status', (s) => {
			if (s.state === 'connected' && this.archiveUrl) void this.backfill();
		});
	}

	/** Retry what an earlier run left unfinished, then listen. */
	async start(): Promise<void> {
		this.track(retryPending(this.ingestOptions()));
		this.listener?.start();
		const every = this.opts.retryIntervalMs ?? config.alerts.retryIntervalMs;
		this.retryTimer = setInterval(() => {
			if (this.stopped) return;
			this.track(retryPending(this.ingestOptions()));
			// Sky maps whose download failed for a passing reason, when due (1, 2, 4, 8 min apart).
			this.track(retrySkymaps(this.ingestOptions()));
		}, every);
		this.retryTimer.unref();
		const pollMs = this.opts.archivePollMs ?? config.alerts.archivePollMs;
		if (this.archiveUrl && pollMs > 0) {
			// JSON notices are not sent over VTP: they are read from the archive, on this timer.
			this.pollTimer = setInterval(() => {
				if (!this.stopped) void this.backfill();
			}, pollMs);
			this.pollTimer.unref();
		}
		if (this.listener) this.log('info', `listening to ${this.listener.status().host}:${this.listener.status().port}${this.archiveUrl ? `, back-fill from ${this.archiveUrl}` : ''}`);
	}

	/** Stop listening and wait for processing under way. */
	async stop(): Promise<void> {
		this.stopped = true;
		if (this.retryTimer) clearInterval(this.retryTimer);
		if (this.pollTimer) clearInterval(this.pollTimer);
		await this.listener?.stop();
		await this.backfilling?.catch(() => undefined);
		while (this.working.size) await Promise.allSettled([...this.working]);
	}

	status(): { listener: ListenerStatus | null; archiveUrl: string | null; lastBackfill: AlertsService['lastBackfill'] } {
		return { listener: this.listener?.status() ?? null, archiveUrl: this.archiveUrl, lastBackfill: this.lastBackfill };
	}

	private ingestOptions(actor: Actor = SYSTEM) {
		return { actor, fetch: this.opts.fetch };
	}

	private track<T>(p: Promise<T>): Promise<T> {
		const q = p.catch((e) => {
			this.log('error', `processing failed: ${(e as Error).message}`);
			return undefined;
		});
		this.working.add(q);
		void q.finally(() => this.working.delete(q));
		return p;
	}

	/** Store durably (what the ack waits for), then process in the background. */
	commit(raw: string, via: InboxVia, format?: NoticeFormat): CommitResult {
		const c = commitNotice(raw, via, { format });
		if (!c.duplicate && !this.stopped) this.track(processInbox(c.inboxId, this.ingestOptions()));
		return c;
	}

	/** Fetch what the broker published since a little before the last notice we received. */
	backfill(): Promise<number> {
		if (!this.archiveUrl) return Promise.resolve(0);
		if (this.backfilling) return this.backfilling;
		const last = db
			.select({ at: table.noticeInbox.receivedAt })
			.from(table.noticeInbox)
			.where(inArray(table.noticeInbox.via, ['vtp', 'backfill']))
			.orderBy(desc(table.noticeInbox.receivedAt))
			.limit(1)
			.get();
		const since = last
			? new Date(last.at.getTime() - (this.opts.backfillOverlapMs ?? 120_000))
			: new Date(Date.now() - (this.opts.backfillInitialMs ?? 24 * 3600_000));
		const run = backfillFromArchive({ baseUrl: this.archiveUrl, since, commit: async (text, format) => void this.commit(text, 'backfill', format) })
			.then((n) => {
				this.lastBackfill = { at: new Date().toISOString(), committed: n, error: null };
				return n;
			})
			.catch((e) => {
				this.lastBackfill = { at: new Date().toISOString(), committed: 0, error: (e as Error).message };
				this.log('warn', `back-fill from ${this.archiveUrl} failed: ${(e as Error).message}`);
				return 0;
			})
			.finally(() => (this.backfilling = null));
		this.backfilling = run;
		return run;
	}
}

/** Start the process's alert service once (from the `init` hook). */
export async function startAlerts(opts: AlertsServiceOptions = {}): Promise<AlertsService> {
	let created = false;
	const alerts = service('alerts', () => {
		created = true;
		return new AlertsService(opts);
	});
	if (created) await alerts.start();
	return alerts;
}

export async function stopAlerts(): Promise<void> {
	await stopService('alerts');
}

export function alertsService(): AlertsService | null {
	return runningService<AlertsService>('alerts');
}

export interface SubmitResult {
	/** 202: kept, waiting for a packet it cites (see IngestOutcomeKind 'waiting'). */
	status: 200 | 201 | 202 | 422;
	duplicate: boolean;
	outcome: IngestOutcome;
}

/**
 * A notice given by hand (API or upload page): stored in the inbox like any other, processed
 * at once so that the answer can name the event. A repeat of a known IVORN answers 200 with
 * the existing ids; a malformed notice is kept in the inbox and answered 422 with its reason.
 * The format is the caller's (the API's Content-Type) or else read from the text.
 */
export async function submitNotice(
	raw: string,
	via: Extract<InboxVia, 'api' | 'upload'>,
	opts: { actor?: Actor; uploadedSkymapPath?: string | null; fetch?: SkymapFetchOptions; format?: NoticeFormat } = {}
): Promise<SubmitResult> {
	const c = commitNotice(raw, via, { uploadedSkymapPath: opts.uploadedSkymapPath, format: opts.format });
	const outcome = await processInbox(c.inboxId, { actor: opts.actor, fetch: opts.fetch });
	const status = outcome.outcome === 'rejected' ? 422 : outcome.outcome === 'waiting' ? 202 : c.duplicate || outcome.outcome === 'already-processed' ? 200 : 201;
	return { status, duplicate: c.duplicate, outcome };
}
