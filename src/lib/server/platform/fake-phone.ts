/**
 * A local fake of the messaging service, for development and tests: an HTTP server on 127.0.0.1
 * that answers the two REST calls the service's SDK makes for us — create a message
 * (`POST /2010-04-01/Accounts/{AccountSid}/Messages.json`, form fields To, From, Body) and create
 * a call (`…/Calls.json`, To, From, Twiml) — with HTTP Basic authentication by account id and
 * token, as the service does. What it receives is kept in memory (newest first) and written to a
 * spool folder, like the fake SMTP server. It can also play a text reply: it POSTs to the app's
 * inbound hook with the service's webhook signature (HMAC-SHA1 under the auth token over the URL
 * followed by the sorted form fields, base64, in `X-Twilio-Signature`), computed here on its own
 * so the app's check (the SDK's `validateRequest`) is tried against a second implementation.
 */
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import { createHmac, randomBytes, timingSafeEqual } from 'node:crypto';
import { mkdirSync, readdirSync, unlinkSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { listenOnLoopback } from './loopback';

export interface PhoneRecord {
	id: number;
	/** The service's id: SM… for a message, CA… for a call, or the inbound message's id. */
	sid: string;
	direction: 'outbound' | 'inbound';
	type: 'sms' | 'voice';
	at: string;
	from: string;
	to: string;
	/** The text of a message, or the words the call speaks (taken from its <Say> elements). */
	text: string;
	/** For a call: the voice document as sent. */
	twiml: string | null;
	/** For an inbound reply: the app's answer status. */
	hookStatus: number | null;
}

interface FakePhone {
	server: Server | null;
	port: number | null;
	accountSid: string;
	authToken: string;
	spoolDir: string | null;
	records: PhoneRecord[];
	nextId: number;
	/** Requests still to refuse with 503, to try the app's retries. */
	failNext: number;
}

const SLOT = Symbol.for('strainline.fake-phone');
const KEEP = 500;
const BODY_MAX = 64 * 1024;

function fake(): FakePhone {
	const g = globalThis as unknown as Record<symbol, FakePhone | undefined>;
	g[SLOT] ??= {
		server: null,
		port: null,
		accountSid: `AC${randomBytes(16).toString('hex')}`,
		authToken: randomBytes(16).toString('hex'),
		spoolDir: null,
		records: [],
		nextId: 1,
		failNext: 0
	};
	return g[SLOT]!;
}

/** The account id and token the fake accepts (made once per process). */
export function fakePhoneCredentials(): { accountSid: string; authToken: string } {
	const f = fake();
	return { accountSid: f.accountSid, authToken: f.authToken };
}

/** Signature of a webhook request as the service makes it (its security documentation: HMAC-SHA1, URL + sorted name/value pairs, base64). */
export function webhookSignature(authToken: string, url: string, params: Record<string, string>): string {
	const data = url + Object.keys(params).sort().map((k) => k + params[k]).join('');
	return createHmac('sha1', authToken).update(data, 'utf8').digest('base64');
}

const sidOf = (prefix: string) => prefix + randomBytes(16).toString('hex');

/** The spoken words of a voice document: the text of its <Say> elements, entities decoded. */
export function spokenText(twiml: string): string {
	const says = [...twiml.matchAll(/<Say\b[^>]*>([\s\S]*?)<\/Say>/g)].map((m) => m[1]);
	return says
		.join(' ')
		.replace(/&lt;/g, '<')
		.replace(/&gt;/g, '>')
		.replace(/&quot;/g, '"')
		.replace(/&apos;/g, "'")
		.replace(/&amp;/g, '&')
		.trim();
}

function keep(rec: Omit<PhoneRecord, 'id' | 'at'>): PhoneRecord {
	const f = fake();
	const full: PhoneRecord = { id: f.nextId++, at: new Date().toISOString(), ...rec };
	f.records.unshift(full);
	f.records.length = Math.min(f.records.length, KEEP);
	if (f.spoolDir) {
		try {
			mkdirSync(f.spoolDir, { recursive: true });
			const name = `${String(Date.now()).padStart(15, '0')}-${String(full.id).padStart(6, '0')}.json`;
			writeFileSync(join(f.spoolDir, name), JSON.stringify(full), { mode: 0o600 });
			const files = readdirSync(f.spoolDir).filter((n) => n.endsWith('.json')).sort();
			for (const old of files.slice(0, Math.max(0, files.length - KEEP))) unlinkSync(join(f.spoolDir, old));
		} catch (e) {
			console.error(`[phone] could not write to ${f.spoolDir}:`, e);
		}
	}
	return full;
}

function answer(res: ServerResponse, status: number, body: unknown): void {
	res.writeHead(status, { 'content-type': 'application/json' });
	res.end(JSON.stringify(body));
}

/** An error in the service's shape: { code, message, more_info, status }. */
function refuse(res: ServerResponse, status: number, code: number, message: string): void {
	answer(res, status, { code, message, more_info: `https://www.twilio.com/docs/errors/${code}`, status });
}

function authorised(req: IncomingMessage): boolean {
	const f = fake();
	const m = /^Basic\s+(.+)$/i.exec(req.headers.authorization ?? '');
	if (!m) return false;
	const given = Buffer.from(m[1], 'base64');
	const expected = Buffer.from(`${f.accountSid}:${f.authToken}`);
	return given.length === expected.length && timingSafeEqual(given, expected);
}

async function readForm(req: IncomingMessage): Promise<URLSearchParams | null> {
	let size = 0;
	const chunks: Buffer[] = [];
	for await (const chunk of req) {
		size += (chunk as Buffer).length;
		if (size > BODY_MAX) return null;
		chunks.push(chunk as Buffer);
	}
	return new URLSearchParams(Buffer.concat(chunks).toString('utf8'));
}

const E164 = /^\+[1-9]\d{6,14}$/;

async function handle(req: IncomingMessage, res: ServerResponse): Promise<void> {
	const f = fake();
	const m = /^\/2010-04-01\/Accounts\/([^/]+)\/(Messages|Calls)\.json$/.exec((req.url ?? '').split('?')[0]);
	if (!m || req.method !== 'POST') return refuse(res, 404, 20404, 'The requested resource was not found');
	if (!authorised(req) || m[1] !== f.accountSid) return refuse(res, 401, 20003, 'Authentication Error - invalid username');
	const form = await readForm(req);
	if (!form) return refuse(res, 413, 21617, 'The concatenated message body exceeds the 1600 character limit');
	if (f.failNext > 0) {
		f.failNext--;
		return refuse(res, 503, 20503, 'Service unavailable (the fake was told to fail this request)');
	}
	const to = form.get('To') ?? '';
	const from = form.get('From') ?? '';
	if (!E164.test(to)) return refuse(res, 400, 21211, `The 'To' number ${to} is not a valid phone number.`);
	if (m[2] === 'Messages') {
		const body = form.get('Body') ?? '';
		if (!body) return refuse(res, 400, 21602, 'Message body is required.');
		if (body.length > 1600) return refuse(res, 400, 21617, 'The concatenated message body exceeds the 1600 character limit');
		const rec = keep({ sid: sidOf('SM'), direction: 'outbound', type: 'sms', from, to, text: body, twiml: null, hookStatus: null });
		return answer(res, 201, { sid: rec.sid, account_sid: f.accountSid, to, from, body, status: 'queued', num_segments: String(Math.ceil(body.length / 160)), date_created: new Date().toUTCString() });
	}
	const twiml = form.get('Twiml') ?? '';
	if (!/<Response>[\s\S]*<\/Response>/.test(twiml)) return refuse(res, 400, 21205, 'Url or Twiml is required');
	const rec = keep({ sid: sidOf('CA'), direction: 'outbound', type: 'voice', from, to, text: spokenText(twiml), twiml, hookStatus: null });
	return answer(res, 201, { sid: rec.sid, account_sid: f.accountSid, to, from, status: 'queued', date_created: new Date().toUTCString() });
}

/** Start the fake on 127.0.0.1 (once per process); a taken port falls back to any free one. */
export async function startFakePhone(port: number, spoolDir: string | null = null): Promise<number> {
	const f = fake();
	if (f.server && f.port !== null) return f.port;
	f.spoolDir = spoolDir;
	const server = createServer((req, res) => {
		handle(req, res).catch((e) => {
			console.error('[phone] fake failed on a request', e);
			if (!res.headersSent) refuse(res, 500, 20500, 'Internal Server Error');
		});
	});
	const bound = await listenOnLoopback(server, port, () => server.address());
	server.unref();
	f.server = server;
	f.port = bound;
	return bound;
}

export async function stopFakePhone(): Promise<void> {
	const f = fake();
	if (!f.server) return;
	await new Promise<void>((resolve) => f.server!.close(() => resolve()));
	f.server = null;
	f.port = null;
}

export function fakePhonePort(): number | null {
	return fake().port;
}

export function fakePhoneSpoolDir(): string | null {
	return fake().spoolDir;
}

export function phoneRecords(): readonly PhoneRecord[] {
	return fake().records;
}

/** Refuse the next `n` requests with 503 (the service being down), to try retries. */
export function failNextPhoneRequests(n: number): void {
	fake().failNext = n;
}

/**
 * Play a text reply from `from` to our number: POST to the app's inbound hook at `hookUrl` the way
 * the service does (form fields MessageSid, AccountSid, From, To, Body; signed). Returns the hook's
 * HTTP status and answer text.
 */
export async function sendInboundText(hookUrl: string, o: { from: string; to: string; body: string }): Promise<{ status: number; answer: string }> {
	const f = fake();
	const params: Record<string, string> = { MessageSid: sidOf('SM'), AccountSid: f.accountSid, From: o.from, To: o.to, Body: o.body, NumMedia: '0' };
	let status = 0;
	let text = '';
	try {
		const res = await fetch(hookUrl, {
			method: 'POST',
			headers: { 'content-type': 'application/x-www-form-urlencoded', 'x-twilio-signature': webhookSignature(f.authToken, hookUrl, params) },
			body: new URLSearchParams(params).toString(),
			redirect: 'manual',
			signal: AbortSignal.timeout(10_000)
		});
		status = res.status;
		text = (await res.text()).slice(0, 2000);
	} catch (e) {
		text = (e as Error).message;
	}
	keep({ sid: params.MessageSid, direction: 'inbound', type: 'sms', from: o.from, to: o.to, text: o.body, twiml: null, hookStatus: status });
	return { status, answer: text };
}
