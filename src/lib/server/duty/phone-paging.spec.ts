import { afterAll, beforeEach, describe, expect, it } from 'vitest';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { createUser } from '../people/people';
import { receivedMail, stopFakeSmtp } from '../platform/fake-smtp';
import { failNextPhoneRequests, fakePhoneCredentials, phoneRecords, stopFakePhone, webhookSignature } from '../platform/fake-phone';
import { validInboundSignature } from '../platform/phone';
import { SYSTEM } from '../platform/realtime';
import { requestVerification, saveChannels, verifyCode, reachFor, PhoneError } from '../people/phone';
import { PAGE_RETRY_BASE_S, PAGE_SEND_MAX_ATTEMPTS, PHONE_REPLIES_PER_ADDRESS_PER_MIN, PHONE_REPLIES_PER_NUMBER_PER_MIN } from '../../limits';
import * as duty from './paging';
import { acknowledgeByLink, acknowledgeByReply, ackLinkPreview, AckLinkError, receiveInboundText } from './ack-links';
import { RateLimitError } from '../platform/errors';
import { sendDue } from './page-delivery';

const MIN = 60_000;
const HOUR = 60 * MIN;
let seq = 0;

async function person(name: string, roles: table.Role[]) {
	const n = ++seq;
	const email = `${name.toLowerCase().replace(/[^a-z]+/g, '-')}-${n}@phone.test`;
	const id = await createUser({ email, name, password: 'long-enough-pw', roles });
	return { id, email, name, roles, number: `+3460${String(Date.now() % 1e5).padStart(5, '0')}${String(n).padStart(3, '0')}` };
}

const textsTo = (number: string) => phoneRecords().filter((r) => r.direction === 'outbound' && r.to === number);

/** Verify the person's number the way they would: ask for a code, read the text, type it back. */
async function verified(p: Awaited<ReturnType<typeof person>>) {
	await requestVerification(p.id, p.number.replace(/^(\+\d{2})(\d{3})/, '$1 $2 '));
	const code = /code is (\d{6})/.exec(textsTo(p.number)[0].text)![1];
	verifyCode(p.id, code);
	return p;
}

function insertEvent(receivedAt: Date) {
	const n = ++seq;
	const eventId = `pev${n}`;
	const noticeId = `pno${n}`;
	db.insert(table.gwEvent).values({ id: eventId, sourceEventId: `S-phone-${n}`, role: 'observation', state: 'active', eventTime: receivedAt }).run();
	const inbox = db.insert(table.noticeInbox).values({ ivorn: `ivo://test.invalid/phone#${n}`, rawXml: '<voe/>', via: 'vtp', receivedAt }).returning().get();
	db.insert(table.notice)
		.values({
			id: noticeId,
			eventId,
			inboxId: inbox.id,
			ivorn: `ivo://test.invalid/phone#${n}`,
			kind: 'initial',
			role: 'observation',
			authoredAt: receivedAt,
			farHz: 1e-10,
			classification: { BNS: 0.9, NSBH: 0.05, BBH: 0, Terrestrial: 0.05 },
			citations: [],
			parsed: {},
			createdAt: receivedAt
		})
		.run();
	return { eventId, noticeId, sourceEventId: `S-phone-${n}` };
}

function messages(eventId: string) {
	return db.select().from(table.pageMessage).where(eq(table.pageMessage.eventId, eventId)).all();
}

beforeEach(() => {
	createTestDatabase();
	failNextPhoneRequests(0);
});
afterAll(async () => {
	await stopFakeSmtp();
	await stopFakePhone();
});

describe('phone numbers and channels', () => {
	it('refuses a number that is not E.164 and a wrong code, and verifies with the texted one', async () => {
		expect.hasAssertions();
		const p = await person('Number Owner', ['duty']);
		for (const bad of ['600 123 456', '+0 600 123', '+34 6001234567890123', 'call me', '+34-600-abc-123']) {
			await expect(requestVerification(p.id, bad)).rejects.toThrow(/international form/);
		}
		await requestVerification(p.id, `${p.number.slice(0, 3)} (${p.number.slice(3, 6)}) ${p.number.slice(6)}`);
		const text = textsTo(p.number);
		expect(text).toHaveLength(1);
		const code = /code is (\d{6})/.exec(text[0].text)![1];
		const wrong = code === '000000' ? '111111' : '000000';
		expect(() => verifyCode(p.id, wrong)).toThrow(/does not match/);
		// Asking again at once is refused: the form cannot flood a number with texts.
		await expect(requestVerification(p.id, p.number)).rejects.toThrow(/wait a moment/);
		expect(textsTo(p.number)).toHaveLength(1);
		expect(verifyCode(p.id, code)).toBe(p.number);
		expect(reachFor(p.id, 'duty.page')).toEqual({ channels: ['email', 'sms'], number: p.number });
	});

	it('keeps a duty scientist on two channels for duty pages, when choosing and when sending', async () => {
		expect.hasAssertions();
		const d = await verified(await person('Two Ways', ['duty']));
		const err = (() => {
			try {
				saveChannels({ id: d.id, roles: d.roles }, { 'duty.page': ['voice'] });
			} catch (e) {
				return e as PhoneError;
			}
		})();
		expect(err).toBeInstanceOf(PhoneError);
		expect(err!.fields['channel.duty.page']).toMatch(/at least two ways/);
		saveChannels({ id: d.id, roles: d.roles }, { 'duty.page': ['sms', 'voice'], 'duty.stand-down': ['sms'] });
		expect(reachFor(d.id, 'duty.page').channels).toEqual(['email', 'sms', 'voice']);
		// A stand-down is not bound by the rule: text alone as chosen.
		expect(reachFor(d.id, 'duty.stand-down').channels).toEqual(['sms']);
		// A choice stored before the rule (or edited in the database) is mended when the page goes out.
		db.update(table.phoneContact).set({ channels: { 'duty.page': ['voice'] } }).where(eq(table.phoneContact.userId, d.id)).run();
		expect(reachFor(d.id, 'duty.page').channels).toEqual(['email', 'voice']);
		// Without a verified number text and voice cannot be chosen.
		const n = await person('No Phone', ['observer']);
		expect(() => saveChannels({ id: n.id, roles: n.roles }, { 'duty.stand-down': ['sms'] })).toThrow(/verified phone number/);
	});
});

describe('paging by each channel', () => {
	it('sends the e-mail, the text and the call of one page, each with the one-time link or code', async () => {
		expect.hasAssertions();
		const now = new Date();
		const d = await verified(await person('All Channels', ['duty']));
		saveChannels({ id: d.id, roles: d.roles }, { 'duty.page': ['email', 'sms', 'voice'] });
		duty.addShift(SYSTEM, { userId: d.id, startsAt: new Date(now.getTime() - HOUR), endsAt: new Date(now.getTime() + HOUR), rank: 0 });
		const ev = insertEvent(now);
		const [page] = await duty.pageForNotice(ev.eventId, ev.noticeId, now);
		const ack = db.select().from(table.pageAck).where(eq(table.pageAck.pageId, page.id)).get()!;

		const mail = receivedMail().find((m) => m.to.includes(d.email))!;
		expect(mail.text).toMatch(/\/ack\/[A-Za-z0-9_-]+/);
		expect(mail.text).toContain(`reply ${ack.code}`);
		const [sms] = textsTo(d.number).filter((r) => r.type === 'sms' && r.text.includes(ev.sourceEventId));
		expect(sms.text).toMatch(new RegExp(`/ack/[A-Za-z0-9_-]+ or reply ${ack.code}`));
		expect(sms.text.length).toBeLessThanOrEqual(320);
		const [call] = textsTo(d.number).filter((r) => r.type === 'voice');
		expect(call.twiml).toMatch(/^<\?xml[^>]*\?><Response><Say language="en-GB">/);
		expect(call.text).toContain(`code ${ack.code.split('').join(' ')}`);
		expect(messages(ev.eventId).map((m) => [m.channel, m.status, m.attempts]).sort()).toEqual([
			['email', 'sent', 1],
			['sms', 'sent', 1],
			['voice', 'sent', 1]
		]);
		const rows = duty.pagesFor([ev.eventId]).get(ev.eventId)!;
		expect(rows[0].deliveries.map((x) => x.channel)).toEqual(['email', 'sms', 'voice']);
	});

	it('escalates with a fake clock to the second person, who gets a text', async () => {
		expect.hasAssertions();
		const t0 = new Date('2026-04-01T02:00:00Z');
		const first = await person('First Rank', ['duty']);
		const second = await verified(await person('Second Rank', ['coordinator']));
		saveChannels({ id: second.id, roles: second.roles }, { 'duty.page': ['email', 'sms'] });
		duty.addShift(SYSTEM, { userId: first.id, startsAt: new Date(t0.getTime() - HOUR), endsAt: new Date(t0.getTime() + HOUR), rank: 0 });
		duty.addShift(SYSTEM, { userId: second.id, startsAt: new Date(t0.getTime() - HOUR), endsAt: new Date(t0.getTime() + HOUR), rank: 1 });
		const ev = insertEvent(t0);
		await duty.pageForNotice(ev.eventId, ev.noticeId, t0);
		expect(textsTo(second.number).filter((r) => r.text.includes(ev.sourceEventId))).toEqual([]);

		expect(await duty.escalate(new Date(t0.getTime() + 9 * MIN))).toBe(0);
		expect(await duty.escalate(new Date(t0.getTime() + duty.DEFAULT_ESCALATE_AFTER_MIN * MIN + 1000))).toBe(1);
		const texts = textsTo(second.number).filter((r) => r.text.includes(ev.sourceEventId));
		expect(texts).toHaveLength(1);
		expect(texts[0].text).toMatch(/^Strainline ESCALATED: /);
		// The first person had no phone: e-mail only, twice never.
		expect(messages(ev.eventId).filter((m) => m.userId === first.id).map((m) => m.channel)).toEqual(['email']);
	});
});

describe('acknowledging from the message', () => {
	async function paged(now: Date) {
		const d = await verified(await person('Acker', ['duty']));
		// Only this person on the roster, so a second call in one test pages its own person.
		db.delete(table.dutyShift).run();
		duty.addShift(SYSTEM, { userId: d.id, startsAt: new Date(now.getTime() - HOUR), endsAt: new Date(now.getTime() + HOUR), rank: 0 });
		const ev = insertEvent(now);
		const [page] = await duty.pageForNotice(ev.eventId, ev.noticeId, now);
		const sms = textsTo(d.number).find((r) => r.text.includes(ev.sourceEventId))!;
		const token = /\/ack\/([A-Za-z0-9_-]+)/.exec(sms.text)![1];
		const code = db.select().from(table.pageAck).where(eq(table.pageAck.pageId, page.id)).get()!.code;
		return { d, ev, page, token, code };
	}
	const statusOf = (f: () => unknown) => {
		try {
			f();
		} catch (e) {
			return e instanceof AckLinkError ? e.status : -1;
		}
		return 0;
	};

	it('by link: opening changes nothing, confirming acknowledges once; reuse, expiry and forgery are refused', async () => {
		expect.hasAssertions();
		const now = new Date();
		const { d, ev, page, token } = await paged(now);
		const offer = ackLinkPreview(token, now);
		expect(offer).toMatchObject({ name: 'Acker', sourceEventId: ev.sourceEventId, acknowledgedBy: null });
		expect(db.select().from(table.dutyPage).where(eq(table.dutyPage.id, page.id)).get()!.acknowledgedAt).toBeNull();

		const done = acknowledgeByLink(token, new Date(now.getTime() + 30_000));
		expect(done).toMatchObject({ pages: 1, acknowledgedBy: 'Acker' });
		const row = db.select().from(table.dutyPage).where(eq(table.dutyPage.id, page.id)).get()!;
		expect(row.acknowledgedBy).toBe(d.id);
		expect(row.latencyS).toBeCloseTo(30, 0);
		expect(statusOf(() => acknowledgeByLink(token, new Date(now.getTime() + 60_000)))).toBe(409);
		expect(statusOf(() => ackLinkPreview(token, now))).toBe(409);

		// Expired: a fresh page, confirmed a day and a second later.
		const late = await paged(now);
		expect(statusOf(() => acknowledgeByLink(late.token, new Date(now.getTime() + 24 * HOUR + 1000)))).toBe(410);
		// Forged: one character of the MAC changed; a token of another page with this one's MAC.
		const flipped = late.token.slice(0, -2) + (late.token.at(-2) === 'A' ? 'B' : 'A') + late.token.at(-1);
		expect(statusOf(() => acknowledgeByLink(flipped, now))).toBe(400);
		expect(statusOf(() => acknowledgeByLink('not-a-token', now))).toBe(400);
		expect(db.select().from(table.dutyPage).where(eq(table.dutyPage.id, late.page.id)).get()!.acknowledgedAt).toBeNull();
	});

	it('by reply code from the verified number, once; other numbers and unknown codes are refused', async () => {
		expect.hasAssertions();
		const now = new Date();
		const { d, page, code } = await paged(now);
		expect(acknowledgeByReply('+3499999999', `ok ${code}`, now).status).toBe(404);
		expect(acknowledgeByReply(d.number, 'on my way', now).status).toBe(422);
		expect(acknowledgeByReply(d.number, 'ok XXXXXX', now).status).toBe(404);
		const first = acknowledgeByReply(d.number, `ok ${code.toLowerCase()} thanks`, now);
		expect(first.status).toBe(200);
		expect(first.answer).toContain('acknowledged by Acker');
		expect(db.select().from(table.dutyPage).where(eq(table.dutyPage.id, page.id)).get()!.acknowledgedBy).toBe(d.id);
		const again = acknowledgeByReply(d.number, code, now);
		expect(again.status).toBe(409);
		expect(again.answer).toMatch(/already used/);
	});

	describe('the inbound hook: too many replies', () => {
		const HOOK = 'http://localhost:3000/api/v1/phone/inbound';
		let sid = 0;
		/** A text as the messaging service posts it, signed (or, with `forged`, not). */
		function inbound(from: string, body: string, clientAddress: string, forged = false) {
			const params = { From: from, To: '+15005550006', Body: body, MessageSid: `SMlimit${++sid}` };
			const signature = forged ? 'bm90LWEtc2lnbmF0dXJl' : webhookSignature(fakePhoneCredentials().authToken, HOOK, params);
			return { url: HOOK, signature, params, clientAddress };
		}
		/** The hook's answer status, 429 with the wait when limited (and 4xx for other refusals). */
		async function hook(o: ReturnType<typeof inbound>, now: Date): Promise<{ status: number; retryAfterS?: number; message?: string }> {
			try {
				return { status: (await receiveInboundText(o, now)).status };
			} catch (e) {
				if (e instanceof RateLimitError) return { status: e.status, retryAfterS: e.retryAfterS, message: e.message };
				if (e instanceof AckLinkError) return { status: e.status, message: e.message };
				throw e;
			}
		}
		const at = (t0: Date, s: number) => new Date(t0.getTime() + s * 1000);
		const SERVICE = '198.51.100.7';

		it('the 11th reply from one number within a minute gets 429; another number goes through; after the minute the number is taken again', async () => {
			expect.hasAssertions();
			expect(PHONE_REPLIES_PER_NUMBER_PER_MIN).toBe(10);
			const t0 = new Date();
			const a = await paged(t0);
			const b = await paged(t0);
			// Ten replies without a code: answered (422) as today.
			for (let i = 0; i < PHONE_REPLIES_PER_NUMBER_PER_MIN; i++) expect((await hook(inbound(a.d.number, 'on my way', SERVICE), at(t0, i))).status).toBe(422);
			const limited = await hook(inbound(a.d.number, `ok ${a.code}`, SERVICE), at(t0, 30));
			expect(limited.status).toBe(429);
			expect(limited.retryAfterS).toBe(30);
			expect(limited.message).toBe(`Too many text replies from ${a.d.number}: at most 10 a minute. Wait 30 seconds, then reply with the page’s code once.`);
			// Refused, so nothing was acknowledged; and a refused reply does not lengthen the wait.
			expect(db.select().from(table.dutyPage).where(eq(table.dutyPage.id, a.page.id)).get()!.acknowledgedAt).toBeNull();
			expect(await hook(inbound(a.d.number, `ok ${a.code}`, SERVICE), at(t0, 45))).toMatchObject({ status: 429, retryAfterS: 15 });
			// Another number from the same service address is not held back.
			expect((await hook(inbound(b.d.number, `ok ${b.code}`, SERVICE), at(t0, 45))).status).toBe(200);
			expect(db.select().from(table.dutyPage).where(eq(table.dutyPage.id, b.page.id)).get()!.acknowledgedBy).toBe(b.d.id);
			// Once the first replies are a minute old, the number is taken again and its code acknowledges.
			expect((await hook(inbound(a.d.number, `ok ${a.code}`, SERVICE), at(t0, 60.5))).status).toBe(200);
			expect(db.select().from(table.dutyPage).where(eq(table.dutyPage.id, a.page.id)).get()!.acknowledgedBy).toBe(a.d.id);
		});

		it('limits one client address to 60 a minute, signed or not; unsigned requests never use up a number’s replies', async () => {
			expect.hasAssertions();
			expect(PHONE_REPLIES_PER_ADDRESS_PER_MIN).toBe(60);
			const t0 = new Date();
			const a = await paged(t0);
			const FLOOD = '203.0.113.9';
			// Forged requests in a victim's name: refused for their signature, counted against their address only.
			for (let i = 0; i < 20; i++) expect((await hook(inbound(a.d.number, 'ok', FLOOD, true), at(t0, 1))).status).toBe(403);
			for (let i = 20; i < PHONE_REPLIES_PER_ADDRESS_PER_MIN; i++) expect((await hook(inbound(`+1202555${String(1000 + i)}`, 'ok ACDEFG', FLOOD), at(t0, 2))).status).toBe(404);
			const limited = await hook(inbound('+12025559999', 'ok ACDEFG', FLOOD), at(t0, 20));
			expect(limited).toMatchObject({ status: 429, retryAfterS: 41 });
			expect(limited.message).toContain('at most 60 a minute');
			expect((await hook(inbound(a.d.number, `ok ${a.code}`, FLOOD), at(t0, 20))).status).toBe(429);
			// The real sender, through the service's own address, still gets through.
			expect((await hook(inbound(a.d.number, `ok ${a.code}`, SERVICE), at(t0, 20))).status).toBe(200);
			expect((await hook(inbound('+12025559999', 'ok ACDEFG', FLOOD), at(t0, 61.5))).status).toBe(404);
		});
	});

	it('checks the inbound hook signature with the SDK against the fake’s own signing', async () => {
		expect.hasAssertions();
		const { authToken } = fakePhoneCredentials();
		const url = 'http://localhost:3000/api/v1/phone/inbound';
		const params = { From: '+34600000001', To: '+15005550006', Body: 'ok ACDEFG', MessageSid: 'SM1' };
		const good = webhookSignature(authToken, url, params);
		expect(await validInboundSignature(good, url, params)).toBe(true);
		expect(await validInboundSignature(good, url, { ...params, Body: 'ok ACDEFH' })).toBe(false);
		expect(await validInboundSignature(webhookSignature('another-secret', url, params), url, params)).toBe(false);
		expect(await validInboundSignature('', url, params)).toBe(false);
	});
});

describe('failed sends', () => {
	it('retries a failed text with back-off, shows the tries on the page row, and gives up visibly', async () => {
		expect.hasAssertions();
		const t0 = new Date();
		const d = await verified(await person('Flaky Line', ['duty']));
		duty.addShift(SYSTEM, { userId: d.id, startsAt: new Date(t0.getTime() - HOUR), endsAt: new Date(t0.getTime() + HOUR), rank: 0 });
		const ev = insertEvent(t0);
		failNextPhoneRequests(1);
		await duty.pageForNotice(ev.eventId, ev.noticeId, t0);
		let sms = messages(ev.eventId).find((m) => m.channel === 'sms')!;
		expect(sms).toMatchObject({ status: 'queued', attempts: 1 });
		expect(sms.lastError).toMatch(/HTTP 503/);
		const row = duty.pagesFor([ev.eventId]).get(ev.eventId)![0].deliveries.find((x) => x.channel === 'sms')!;
		expect(row).toMatchObject({ status: 'queued', attempts: 1 });
		expect(db.select().from(table.eventLog).where(eq(table.eventLog.action, 'duty.page-delivery')).all().some((l) => l.payload.status === 'retrying')).toBe(true);

		// Not yet due: nothing is tried before the back-off.
		expect(await sendDue(new Date(t0.getTime() + (PAGE_RETRY_BASE_S - 1) * 1000))).toBe(0);
		expect(await sendDue(new Date(t0.getTime() + PAGE_RETRY_BASE_S * 1000))).toBe(1);
		sms = messages(ev.eventId).find((m) => m.channel === 'sms')!;
		expect(sms).toMatchObject({ status: 'sent', attempts: 2, lastError: null });
		expect(textsTo(d.number).filter((r) => r.text.includes(ev.sourceEventId))).toHaveLength(1);

		// Down for good: every try fails, the row ends 'failed' after the last one, in view.
		const ev2 = insertEvent(t0);
		failNextPhoneRequests(100);
		await duty.pageForNotice(ev2.eventId, ev2.noticeId, t0);
		let at = t0.getTime();
		for (let i = 1; i < PAGE_SEND_MAX_ATTEMPTS; i++) {
			at += PAGE_RETRY_BASE_S * 1000 * 2 ** (i - 1);
			await sendDue(new Date(at));
		}
		const gaveUp = messages(ev2.eventId).find((m) => m.channel === 'sms')!;
		expect(gaveUp).toMatchObject({ status: 'failed', attempts: PAGE_SEND_MAX_ATTEMPTS, nextAttemptAt: null });
		expect(await sendDue(new Date(at + 24 * HOUR))).toBe(0);
		expect(messages(ev2.eventId).find((m) => m.channel === 'email')!.status).toBe('sent');
		failNextPhoneRequests(0);
	});
});
