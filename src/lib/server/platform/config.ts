/** Runtime settings from the environment, read once. Everything has an embedded default. */
export interface Config {
	databaseUrl: string;
	/** Real SMTP server; when unset a local fake SMTP server receives all mail. */
	smtpUrl: string | null;
	fakeSmtpPort: number;
	mailFrom: string;
	/** Public base URL used in links inside e-mails. */
	publicUrl: string;
	invitationLifetimeMs: number;
	resetLifetimeMs: number;
	/**
	 * Failed sign-ins: `attempts` per client address within `windowMs` (then that client waits);
	 * per account, after `accountFreeFailures` failures each further try waits twice as long as the
	 * last (1 s, 2 s, 4 s, …) up to `accountMaxDelayMs`, so strangers cannot lock the owner out.
	 */
	signInLimit: { attempts: number; windowMs: number; accountFreeFailures: number; accountMaxDelayMs: number };
	/** Password-reset requests within `windowMs`: per address asked for (known or not) and per client. */
	resetLimit: { perAddress: number; perClient: number; windowMs: number };
	alerts: AlertsConfig;
	/** Port of the local fake webhook receiver (0 = any free port); null = not started (`FAKE_WEBHOOK_PORT=off`). */
	fakeWebhookPort: number | null;
	/** When set, the only hosts chat webhooks may use (exact names, or ".domain" for any sub-domain); empty = any public host. */
	webhookHosts: string[];
	/** The observing site's IANA time zone, named in calendar feeds (times there stay in UTC). */
	siteTimeZone: string;
	phone: PhoneConfig;
}

/**
 * Text messages and voice calls through the messaging service's SDK (twilio). Without an account
 * a local fake of the service takes every request on 127.0.0.1 (`fakePort`; 0 = any free port).
 */
export interface PhoneConfig {
	/** PHONE_ACCOUNT_SID; null = the local fake. */
	accountSid: string | null;
	/** PHONE_AUTH_TOKEN: authenticates our requests and signs the service's inbound webhook. */
	authToken: string | null;
	/** PHONE_FROM: the number texts and calls come from (E.164). */
	from: string;
	/** PHONE_API_URL: base URL the SDK talks to instead of the service's own (a proxy, or the fake). */
	apiUrl: string | null;
	fakePort: number;
}

/** Alert ingestion: the broker, the sky-map fetcher and where files go. */
export interface AlertsConfig {
	/** `host:port` of a VTP broker; null = no listener. */
	vtpBroker: string | null;
	/** Base URL of the broker's notice archive (`{url}/notices?since=`); null = no back-fill; "auto" = VTP port − 1 on the broker's host. */
	vtpArchiveUrl: string | null;
	/**
	 * Seconds between two reads of the archive besides the one on every (re)connection; 0 = only on
	 * connection. JSON notices reach us only this way (VTP carries XML), so a broker that publishes
	 * JSON needs it set (`VTP_ARCHIVE_POLL_S`; the demo's `--format json` sets 5).
	 */
	archivePollMs: number;
	/** Hosts sky maps may be fetched from (exact names, or ".domain" for any sub-domain). */
	skymapHosts: string[];
	skymapMaxBytes: number;
	/**
	 * Largest size a gzip sky map may unpack to. The largest real maps are flat nside-1024 maps with
	 * distance layers, about 200 MB (12.6 M pixels × 4 float64 columns); multi-order maps are a few MB.
	 * 256 MiB keeps those and refuses a small file that would inflate to gigabytes of memory.
	 */
	skymapMaxInflatedBytes: number;
	skymapTimeoutMs: number;
	/** Folder for stored files (sky maps under `skymaps/`, uploads under `uploads/`). */
	storageDir: string;
	/** How often unprocessed inbox rows are retried. */
	retryIntervalMs: number;
}

function list(name: string, fallback: string[]): string[] {
	const raw = process.env[name];
	if (raw === undefined || raw.trim() === '') return fallback;
	return raw
		.split(',')
		.map((h) => h.trim().toLowerCase())
		.filter(Boolean);
}

export function loadAlertsConfig(): AlertsConfig {
	return {
		vtpBroker: process.env.VTP_BROKER?.trim() || null,
		vtpArchiveUrl: process.env.VTP_ARCHIVE_URL?.trim() || null,
		archivePollMs: int('VTP_ARCHIVE_POLL_S', 0) * 1000,
		skymapHosts: list('SKYMAP_HOSTS', ['127.0.0.1', 'localhost']),
		skymapMaxBytes: int('SKYMAP_MAX_MB', 64) * 1024 * 1024,
		skymapMaxInflatedBytes: int('SKYMAP_MAX_INFLATED_MB', 256) * 1024 * 1024,
		skymapTimeoutMs: int('SKYMAP_TIMEOUT_S', 20) * 1000,
		storageDir: process.env.STORAGE_DIR?.trim() || 'data',
		retryIntervalMs: int('ALERTS_RETRY_S', 30) * 1000
	};
}

function int(name: string, fallback: number): number {
	const raw = process.env[name];
	if (raw === undefined || raw === '') return fallback;
	const value = Number(raw);
	if (!Number.isFinite(value)) throw new Error(`${name} must be a number, got "${raw}"`);
	return value;
}

function timeZone(name: string, fallback: string): string {
	const raw = process.env[name]?.trim();
	if (!raw) return fallback;
	try {
		new Intl.DateTimeFormat('en-GB', { timeZone: raw });
	} catch {
		throw new Error(`${name} must be an IANA time zone such as Europe/Madrid, got "${raw}"`);
	}
	return raw;
}

export function loadConfig(): Config {
	return {
		databaseUrl: process.env.DATABASE_URL || 'data/strainline.sqlite',
		smtpUrl: process.env.SMTP_URL || null,
		fakeSmtpPort: int('FAKE_SMTP_PORT', 2525),
		mailFrom: process.env.MAIL_FROM || 'Strainline <no-reply@strainline.invalid>',
		publicUrl: (process.env.ORIGIN || process.env.PUBLIC_URL || 'http://localhost:3000').replace(/\/$/, ''),
		invitationLifetimeMs: int('INVITATION_LIFETIME_HOURS', 72) * 3600_000,
		resetLifetimeMs: int('RESET_LIFETIME_MINUTES', 60) * 60_000,
		signInLimit: {
			attempts: int('SIGN_IN_ATTEMPTS', 8),
			windowMs: int('SIGN_IN_WINDOW_MINUTES', 15) * 60_000,
			accountFreeFailures: int('SIGN_IN_ACCOUNT_FREE_FAILURES', 5),
			accountMaxDelayMs: int('SIGN_IN_ACCOUNT_MAX_DELAY_S', 300) * 1000
		},
		resetLimit: {
			perAddress: int('RESET_REQUESTS_PER_ADDRESS', 3),
			perClient: int('RESET_REQUESTS_PER_CLIENT', 10),
			windowMs: int('RESET_WINDOW_MINUTES', 60) * 60_000
		},
		alerts: loadAlertsConfig(),
		fakeWebhookPort: process.env.FAKE_WEBHOOK_PORT?.trim().toLowerCase() === 'off' ? null : int('FAKE_WEBHOOK_PORT', 2580),
		webhookHosts: list('WEBHOOK_HOSTS', []),
		siteTimeZone: timeZone('SITE_TIME_ZONE', 'UTC'),
		phone: {
			accountSid: process.env.PHONE_ACCOUNT_SID?.trim() || null,
			authToken: process.env.PHONE_AUTH_TOKEN?.trim() || null,
			from: process.env.PHONE_FROM?.trim() || '+15005550006',
			apiUrl: process.env.PHONE_API_URL?.trim().replace(/\/$/, '') || null,
			fakePort: int('FAKE_PHONE_PORT', 2590)
		}
	};
}

export const config: Config = loadConfig();
