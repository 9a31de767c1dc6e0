/**
 * Text messages and voice calls through the messaging service's official SDK (`twilio`). With no
 * account configured (PHONE_ACCOUNT_SID unset) every request goes to the local fake
 * (`fake-phone.ts`) on 127.0.0.1: the SDK is given an HTTP client that sends its requests to
 * PHONE_API_URL or the fake instead of the service's own host, so in development and tests it
 * never reaches the internet.
 */
import twilio from 'twilio';
import { join } from 'node:path';
import { config } from './config';
import { fakePhoneCredentials, startFakePhone } from './fake-phone';

const SERVICE_ORIGIN = /^https:\/\/[a-z0-9.-]*twilio\.com/;

/** The SDK's own HTTP client, with the service's host replaced by `baseUrl` (the SDK's documented `httpClient` option). */
function redirectedClient(baseUrl: string): twilio.RequestClient {
	const client = new twilio.RequestClient({ timeout: 10_000 });
	const request = client.request.bind(client);
	client.request = ((opts) => request({ ...opts, uri: opts.uri.replace(SERVICE_ORIGIN, baseUrl) })) as typeof client.request;
	return client;
}

interface Phone {
	client: twilio.Twilio;
	accountSid: string;
	authToken: string;
	fake: boolean;
}

let phone: Phone | null = null;

export function usesFakePhone(): boolean {
	return !config.phone.accountSid;
}

/** Prepare the client; starts the local fake when no account is configured. */
export async function startPhone(): Promise<void> {
	if (phone) return;
	const c = config.phone;
	if (c.accountSid && c.authToken) {
		const client = twilio(c.accountSid, c.authToken, c.apiUrl ? { httpClient: redirectedClient(c.apiUrl) } : { timeout: 10_000 });
		phone = { client: loaded(client), accountSid: c.accountSid, authToken: c.authToken, fake: false };
		return;
	}
	if (c.accountSid && !c.authToken) throw new Error('PHONE_ACCOUNT_SID is set but PHONE_AUTH_TOKEN is not.');
	const port = await startFakePhone(config.phone.fakePort, join(config.alerts.storageDir, 'phone'));
	const { accountSid, authToken } = fakePhoneCredentials();
	const client = twilio(accountSid, authToken, { httpClient: redirectedClient(c.apiUrl ?? `http://127.0.0.1:${port}`) });
	phone = { client: loaded(client), accountSid, authToken, fake: true };
}

/**
 * The SDK loads its message and call APIs on first use (≈ 45 ms of compiling on the server's
 * thread, which fell on the first duty page of the night, while the board was busiest): load them
 * now, at start-up. Touching the getters sends nothing.
 */
function loaded(client: twilio.Twilio): twilio.Twilio {
	void client.messages;
	void client.calls;
	return client;
}

async function ready(): Promise<Phone> {
	if (!phone) await startPhone();
	return phone!;
}

export class PhoneSendError extends Error {}

function failure(e: unknown): PhoneSendError {
	const err = e as { status?: number; code?: number; message?: string };
	const status = err.status ? ` (HTTP ${err.status}${err.code ? `, code ${err.code}` : ''})` : '';
	return new PhoneSendError(`${err.message ?? String(e)}${status}`);
}

/** Send a text message; resolves to the service's message id. */
export async function sendText(to: string, body: string): Promise<string> {
	const p = await ready();
	try {
		const m = await p.client.messages.create({ to, from: config.phone.from, body });
		return m.sid;
	} catch (e) {
		throw failure(e);
	}
}

/** Place a call that speaks `words` (twice, so a person who picks up late still hears it); resolves to the call's id. */
export async function placeCall(to: string, words: string): Promise<string> {
	const p = await ready();
	const doc = new twilio.twiml.VoiceResponse();
	doc.say({ language: 'en-GB' }, words);
	doc.pause({ length: 1 });
	doc.say({ language: 'en-GB' }, words);
	try {
		const c = await p.client.calls.create({ to, from: config.phone.from, twiml: doc.toString() });
		return c.sid;
	} catch (e) {
		throw failure(e);
	}
}

/**
 * Whether an inbound webhook request is the service's own: its signature over our public URL of
 * the hook and the form fields, checked by the SDK under the auth token (the shared secret).
 */
export async function validInboundSignature(signature: string, url: string, params: Record<string, string>): Promise<boolean> {
	const p = await ready();
	if (!signature) return false;
	return twilio.validateRequest(p.authToken, signature, url, params);
}

/** The number texts come from (the service's inbound messages are sent to it). */
export function ourNumber(): string {
	return config.phone.from;
}
