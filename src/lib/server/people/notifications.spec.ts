import { afterAll, beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { receivedMail, stopFakeSmtp, type ReceivedMail } from '../platform/fake-smtp';
import { DomainError } from '../platform/errors';
import * as notifications from './notifications';
import { readUnsubscribeToken, unsubscribeToken } from './unsubscribe';
import { DEFAULT_PREFERENCES, type NotificationPreferences } from '../../notifications.ts';

let n = 0;
beforeEach(() => {
	createTestDatabase();
});
afterAll(() => stopFakeSmtp());

function person(name: string) {
	const userId = `np-${++n}-${Date.now()}`;
	const email = `${userId}@notify.test`;
	db.insert(table.user).values({ id: userId, email, name, passwordHash: 'unused' }).run();
	return { userId, name, email };
}

async function mailTo(email: string, count = 1, timeoutMs = 3000): Promise<ReceivedMail[]> {
	const until = Date.now() + timeoutMs;
	let got = receivedMail().filter((m) => m.to.includes(email));
	while (got.length < count && Date.now() < until) {
		await new Promise((r) => setTimeout(r, 25));
		got = receivedMail().filter((m) => m.to.includes(email));
	}
	return got;
}

const prefs = (p: Partial<NotificationPreferences>): NotificationPreferences => ({ ...DEFAULT_PREFERENCES, kinds: {}, ...p });
const mail = (subject: string) => ({ subject, text: `Body of ${subject}` });

describe('deliveryFor (stored preferences)', () => {
	it('answers today’s behaviour for someone who never chose, and the stored choice afterwards', () => {
		const a = person('Ada Stone');
		const noon = new Date('2026-12-02T12:00:00Z');
		expect(notifications.deliveryFor(a.userId, 'claim.lapsed', 'BNS', noon)).toBe('now');
		notifications.savePreferences(a.userId, prefs({ kinds: { 'claim.lapsed': 'off', 'claims.moved': 'digest' }, quietHours: { start: '22:00', end: '07:00', timeZone: 'Europe/Madrid', action: 'hold' } }));
		expect(notifications.deliveryFor(a.userId, 'claim.lapsed', 'BNS', noon)).toBe('none');
		expect(notifications.deliveryFor(a.userId, 'claims.moved', 'BNS', noon)).toBe('digest');
		// 23:30 UTC is 00:30 in Madrid: quiet.
		expect(notifications.deliveryFor(a.userId, 'candidate.classified', 'BNS', new Date('2026-12-02T23:30:00Z'))).toBe('later');
		expect(notifications.deliveryFor(a.userId, 'duty.page', 'BNS', new Date('2026-12-02T23:30:00Z'))).toBe('now');
	});

	it('refuses preferences that break a rule, field by field, and keeps the stored ones', () => {
		const a = person('Bo Reyes');
		let err: unknown;
		try {
			notifications.savePreferences(a.userId, prefs({ eventClasses: [], quietHours: { start: '06:00', end: '06:00', timeZone: 'Mars/Olympus', action: 'hold' }, kinds: { 'claims.retracted': 'digest' } }));
		} catch (e) {
			err = e;
		}
		expect(err).toBeInstanceOf(DomainError);
		expect((err as DomainError).fields).toEqual({
			eventClasses: 'Choose at least one class, or all events.',
			quietEnd: 'The quiet hours must end at another time than they start.',
			timeZone: expect.stringContaining('“Mars/Olympus” is not a time zone we know'),
			'kind.claims.retracted': 'Safety notices go at once or not at all.'
		});
		expect(notifications.preferencesOf(a.userId)).toEqual(prefs({}));
	});
});

describe('notify and the outbox', () => {
	it('sends at once with an unsubscribe link and the List-Unsubscribe header; a duty page points to the preferences instead', async () => {
		const a = person('Cy Lund');
		expect(await notifications.notify(a, 'claim.lapsed', 'BNS', mail('Lapsed one'))).toBe('now');
		expect(await notifications.notify(a, 'duty.page', 'BNS', mail('Page one'))).toBe('now');
		const got = await mailTo(a.email, 2);
		const lapsed = got.find((m) => m.subject === 'Lapsed one')!;
		const link = lapsed.text.match(/https?:\/\/\S+\/unsubscribe\/([A-Za-z0-9_-]+)/);
		expect(link).not.toBeNull();
		expect(readUnsubscribeToken(link![1])).toEqual({ userId: a.userId, scope: 'claim.lapsed' });
		expect(lapsed.listUnsubscribe).toBe(`<${link![0]}>`);
		const page = got.find((m) => m.subject === 'Page one')!;
		expect(page.text).not.toContain('/unsubscribe/');
		expect(page.text).toContain('Duty pages cannot be switched off');
		expect(page.text).toContain('/account#notifications');
		expect(page.listUnsubscribe).toBeNull();
	});

	it('batches digest kinds into one mail per period, sent one period after the oldest item', async () => {
		const a = person('Di Okafor');
		notifications.savePreferences(a.userId, prefs({ kinds: { 'candidate.classified': 'digest', 'claims.moved': 'digest' }, digestPeriodMin: 60 }));
		const t0 = new Date('2026-12-02T10:00:00Z');
		expect(await notifications.notify(a, 'candidate.classified', 'BNS', mail('First classified'), t0)).toBe('digest');
		expect(await notifications.notify(a, 'claims.moved', 'BNS', mail('Targets moved'), new Date(t0.getTime() + 20 * 60_000))).toBe('digest');
		expect(await notifications.notify(a, 'candidate.classified', 'BNS', mail('Second classified'), new Date(t0.getTime() + 50 * 60_000))).toBe('digest');
		expect(notifications.waitingFor(a.userId)).toHaveLength(3);

		// 59 minutes after the first item: nothing yet.
		expect(await notifications.flushOutbox(new Date(t0.getTime() + 59 * 60_000))).toBe(0);
		expect(await mailTo(a.email, 1, 200)).toEqual([]);
		// An hour after it: one mail holding all three, oldest first.
		expect(await notifications.flushOutbox(new Date(t0.getTime() + 60 * 60_000))).toBe(1);
		const [digest] = await mailTo(a.email);
		expect(digest.subject).toBe('Strainline digest: 3 messages since 2026-12-02 10:00 UTC');
		expect(digest.text.indexOf('First classified')).toBeLessThan(digest.text.indexOf('Targets moved'));
		expect(digest.text.indexOf('Targets moved')).toBeLessThan(digest.text.indexOf('Second classified'));
		const token = digest.listUnsubscribe!.match(/\/unsubscribe\/([A-Za-z0-9_-]+)>/)![1];
		expect(readUnsubscribeToken(token)).toEqual({ userId: a.userId, scope: 'digest' });
		expect(notifications.waitingFor(a.userId)).toEqual([]);
		// Nothing sent twice.
		expect(await notifications.flushOutbox(new Date(t0.getTime() + 180 * 60_000))).toBe(0);
		expect(await mailTo(a.email, 2, 200)).toHaveLength(1);
	});

	it('holds mail that arrives in quiet hours until they end, then sends it as it was; a kind switched off meanwhile is dropped', async () => {
		const a = person('Ed Varga');
		notifications.savePreferences(a.userId, prefs({ quietHours: { start: '22:00', end: '07:00', timeZone: 'UTC', action: 'hold' } }));
		const night = new Date('2026-12-02T23:10:00Z');
		expect(await notifications.notify(a, 'claim.lapsed', 'BNS', mail('Held lapse'), night)).toBe('later');
		expect(await notifications.notify(a, 'claims.moved', 'BNS', mail('Held move'), night)).toBe('later');
		expect(notifications.waitingFor(a.userId).map((w) => w.releaseAt?.toISOString())).toEqual(['2026-12-03T07:00:00.000Z', '2026-12-03T07:00:00.000Z']);
		expect(await notifications.flushOutbox(new Date('2026-12-03T06:59:00Z'))).toBe(0);
		notifications.switchOff(a.userId, ['claims.moved']);
		expect(await notifications.flushOutbox(new Date('2026-12-03T07:00:00Z'))).toBe(1);
		const got = await mailTo(a.email);
		expect(got.map((m) => m.subject)).toEqual(['Held lapse']);
		expect(got[0].text).toContain('Body of Held lapse');
		expect(got[0].text).toContain('/unsubscribe/');
	});
});

describe('unsubscribe links', () => {
	it('switch off only that person’s that kind', () => {
		const a = person('Fay Moreau');
		const b = person('Gil Haddad');
		notifications.savePreferences(a.userId, prefs({ kinds: { 'candidate.classified': 'digest' } }));
		const token = unsubscribeToken(a.userId, 'claim.lapsed');
		expect(notifications.unsubscribePreview(token)).toEqual({ name: 'Fay', labels: ['Lapsed claims'], kinds: ['claim.lapsed'], alreadyOff: false });
		notifications.unsubscribeWithToken(token);
		expect(notifications.preferencesOf(a.userId).kinds).toEqual({ 'claim.lapsed': 'off', 'candidate.classified': 'digest' });
		expect(notifications.preferencesOf(b.userId).kinds).toEqual({});
		expect(notifications.unsubscribePreview(token).alreadyOff).toBe(true);
	});

	it('refuse a tampered token, and one re-signed for another person or kind without the key', () => {
		const a = person('Hal Berg');
		const b = person('Ida Chen');
		const token = unsubscribeToken(a.userId, 'claim.lapsed');
		const bytes = Buffer.from(token, 'base64url');
		// Another person's id under a's signature.
		const payload = Buffer.from(`1:claim.lapsed:${b.userId}`);
		const forged = Buffer.concat([payload, bytes.subarray(bytes.length - 32)]).toString('base64url');
		// Another kind under a's signature.
		const otherKind = Buffer.concat([Buffer.from(`1:candidate.classified:${a.userId}`), bytes.subarray(bytes.length - 32)]).toString('base64url');
		// One bit of the signature flipped.
		const flipped = Buffer.from(bytes);
		flipped[flipped.length - 1] ^= 1;
		for (const bad of [forged, otherKind, flipped.toString('base64url'), token.slice(0, -2), 'not-a-token', '']) {
			expect(readUnsubscribeToken(bad), bad).toBeNull();
			expect(() => notifications.unsubscribeWithToken(bad)).toThrow(/not valid/);
		}
		// A page cannot be unsubscribed from even with a correctly signed token.
		expect(readUnsubscribeToken(unsubscribeToken(a.userId, 'duty.page'))).toBeNull();
		expect(notifications.preferencesOf(a.userId).kinds).toEqual({});
		expect(notifications.preferencesOf(b.userId).kinds).toEqual({});
	});

	it('are signed with the server’s own secret: a token made under another database’s secret is refused', () => {
		const a = person('Jo Lind');
		const token = unsubscribeToken(a.userId, 'claims.moved');
		createTestDatabase();
		db.insert(table.user).values({ id: a.userId, email: a.email, name: a.name, passwordHash: 'unused' }).run();
		expect(readUnsubscribeToken(token)).toBeNull();
		expect(readUnsubscribeToken(unsubscribeToken(a.userId, 'claims.moved'))).toEqual({ userId: a.userId, scope: 'claims.moved' });
	});

	it('for the digest switch off every kind that goes to the digest', () => {
		const a = person('Kai Novak');
		notifications.savePreferences(a.userId, prefs({ kinds: { 'candidate.classified': 'digest', 'claims.moved': 'digest', 'claim.lapsed': 'now' } }));
		const offer = notifications.unsubscribeWithToken(unsubscribeToken(a.userId, 'digest'));
		expect(offer.kinds.sort()).toEqual(['candidate.classified', 'claims.moved']);
		expect(notifications.preferencesOf(a.userId).kinds).toEqual({ 'candidate.classified': 'off', 'claims.moved': 'off', 'claim.lapsed': 'now' });
	});
});
