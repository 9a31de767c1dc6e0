import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { record, SYSTEM } from '../platform/realtime';
import { stopService } from '../platform/services';
import { caughtWebhooks, clearCaughtWebhooks, failNextWebhooks, startFakeWebhook, stopFakeWebhook } from '../platform/fake-webhook';
import { blockedReason, checkedLookup, checkOutboundUrl, OutboundUrlError } from '../platform/outbound';
import { DomainError } from '../platform/errors';
import { config } from '../platform/config';
import * as webhooks from './webhooks';
import { installChatMessages } from './messages';
import { WEBHOOK_MAX_ATTEMPTS, WEBHOOK_NAME_MAX, WEBHOOK_RETRY_BASE_S, WEBHOOK_URL_MAX } from '../../limits';
import { refusalOf } from '../platform/testing/refusal';

let port = 0;
beforeAll(async () => {
	port = await startFakeWebhook(0);
});
afterAll(async () => {
	await stopFakeWebhook();
	await stopService('chat-messages');
});
beforeEach(() => {
	createTestDatabase();
	clearCaughtWebhooks();
	db.insert(table.user).values({ id: 'coord', email: 'coord@hooks.test', name: 'Nia Coord', passwordHash: 'unused' }).run();
});

const fakeUrl = (path = '/hook/ops') => `http://127.0.0.1:${port}${path}`;

function anEvent(id = 'ev-1', sourceEventId = 'S261202xy') {
	db.insert(table.gwEvent).values({ id, sourceEventId, role: 'observation', farHz: 1e-10, classification: { BNS: 0.93, NSBH: 0, BBH: 0, Terrestrial: 0.07 } }).run();
	return id;
}

const refusal = (p: Promise<unknown>) => refusalOf(p, DomainError);

describe('webhook addresses: the allow-list', () => {
	const noDns = async () => {
		throw new Error('no DNS in this test');
	};

	it.each([
		['https://127.0.0.1/hook', 'loopback'],
		['https://10.1.2.3/hook', 'private network'],
		['https://169.254.169.254/latest/meta-data', 'link-local'],
		['https://[::1]/hook', 'loopback'],
		['https://[::ffff:10.0.0.1]/hook', 'private network'],
		['https://[::ffff:127.0.0.1]/hook', 'loopback'],
		['https://[fd00:ec2::254]/hook', 'unique local'],
		['https://[fe80::1]/hook', 'link-local'],
		['https://[64:ff9b::a9fe:a9fe]/hook', 'link-local'],
		['https://192.168.0.10/hook', 'private network'],
		['https://100.64.0.1/hook', 'shared carrier']
	])('refuses %s (%s)', async (url, why) => {
		const e = await refusal(checkOutboundUrl(url, { resolve: noDns }));
		expect(e).toBeInstanceOf(OutboundUrlError);
		expect(e.fields.url).toContain(why);
	});

	it('refuses a host name when any of its addresses is private, IPv4 or IPv6, and names the address', async () => {
		const resolvesTo = (...addresses: string[]) => async () => addresses.map((address) => ({ address, family: address.includes(':') ? 6 : 4 }));
		const one = await refusal(checkOutboundUrl('https://chat.example.org/h', { resolve: resolvesTo('10.0.0.7') }));
		expect(one.fields.url).toMatch(/chat\.example\.org.*10\.0\.0\.7.*private network/);
		const mixed = await refusal(checkOutboundUrl('https://chat.example.org/h', { resolve: resolvesTo('93.184.215.14', '::ffff:192.168.1.1') }));
		expect(mixed.fields.url).toContain('::ffff:192.168.1.1');
		const v6 = await refusal(checkOutboundUrl('https://chat.example.org/h', { resolve: resolvesTo('2606:2800:21f:cb07:6820:80da:af6b:8b2c', 'fd12::1') }));
		expect(v6.fields.url).toContain('fd12::1');
		await expect(checkOutboundUrl('https://chat.example.org/h', { resolve: resolvesTo('93.184.215.14', '2606:2800:21f:cb07:6820:80da:af6b:8b2c') })).resolves.toBeInstanceOf(URL);
	});

	it('refuses plain http, credentials in the address, unknown hosts and non-addresses, in people’s words', async () => {
		expect((await refusal(checkOutboundUrl('http://chat.example.org/h', { resolve: noDns }))).fields.url).toMatch(/https:\/\//);
		expect((await refusal(checkOutboundUrl('https://me:pw@chat.example.org/h', { resolve: noDns }))).fields.url).toMatch(/user name or password/);
		expect((await refusal(checkOutboundUrl('https://nowhere.invalid/h', { resolve: noDns }))).fields.url).toMatch(/could not find the host/);
		expect((await refusal(checkOutboundUrl('chat room', { resolve: noDns }))).fields.url).toMatch(/not a web address/);
		expect((await refusal(checkOutboundUrl('https://localhost:8443/h', { resolve: noDns }))).fields.url).toMatch(/loopback/);
	});

	it('lets through the configured fake receiver only, on its own port and over http', async () => {
		await expect(checkOutboundUrl(`http://127.0.0.1:${port}/hook`, { fake: { port } })).resolves.toBeInstanceOf(URL);
		await expect(checkOutboundUrl(`http://127.0.0.1:${port + 1}/hook`, { fake: { port } })).rejects.toBeInstanceOf(OutboundUrlError);
		await expect(checkOutboundUrl(`http://127.0.0.1:${port}/hook`, { fake: null })).rejects.toBeInstanceOf(OutboundUrlError);
	});

	it('classifies addresses the way the IANA special-purpose registries do', () => {
		expect(blockedReason('8.8.8.8')).toBeNull();
		expect(blockedReason('172.15.255.255')).toBeNull();
		expect(blockedReason('172.16.0.1')).not.toBeNull();
		expect(blockedReason('172.31.255.255')).not.toBeNull();
		expect(blockedReason('172.32.0.0')).toBeNull();
		expect(blockedReason('2001:4860:4860::8888')).toBeNull();
		expect(blockedReason('::')).not.toBeNull();
		expect(blockedReason('2002:0a00:0001::1')).toMatch(/private/); // 6to4 around 10.0.0.1
	});

	it('the connection-time lookup refuses a name that turned private after it was saved', async () => {
		const lookup = checkedLookup(async () => [{ address: '169.254.169.254', family: 4 }]);
		const err = await new Promise<NodeJS.ErrnoException | null>((resolve) => lookup('chat.example.org', {}, (e) => resolve(e)));
		expect(err?.code).toBe('EBLOCKED');
	});

	it('keeps to the site’s list of chat hosts when one is set (the fake receiver aside)', async () => {
		const saved = config.webhookHosts;
		config.webhookHosts = ['.chat.example.org'];
		try {
			const e = await refusal(webhooks.addWebhook({ id: 'coord' }, { name: 'Ops', url: 'https://8.8.8.8/hook', kinds: ['alert.retraction'] }));
			expect(e.fields.url).toMatch(/not among the chat hosts this site allows \(\.chat\.example\.org\)/);
			await expect(webhooks.addWebhook({ id: 'coord' }, { name: 'Fake', url: fakeUrl(), kinds: ['alert.retraction'] })).resolves.toEqual(expect.any(String));
		} finally {
			config.webhookHosts = saved;
		}
	});

	it('refuses oversized and empty input with field messages, and keeps nothing', async () => {
		const longName = await refusal(webhooks.addWebhook({ id: 'coord' }, { name: 'x'.repeat(WEBHOOK_NAME_MAX + 1), url: fakeUrl(), kinds: ['alert.retraction'] }));
		expect(longName.fields.name).toContain(`at most ${WEBHOOK_NAME_MAX}`);
		const longUrl = await refusal(webhooks.addWebhook({ id: 'coord' }, { name: 'Ops', url: `https://chat.example.org/${'a'.repeat(WEBHOOK_URL_MAX)}`, kinds: ['alert.retraction'] }));
		expect(longUrl.fields.url).toContain(`at most ${WEBHOOK_URL_MAX}`);
		const noKinds = await refusal(webhooks.addWebhook({ id: 'coord' }, { name: 'Ops', url: fakeUrl(), kinds: [] }));
		expect(noKinds.fields.kinds).toMatch(/at least one/);
		expect(db.select().from(table.chatWebhook).all()).toHaveLength(0);
	});
});

describe('webhook delivery through the outbox', () => {
	it('sends each message once per webhook, however often the reaction runs, and only to webhooks taking its kind', async () => {
		const stop = installChatMessages();
		const eventId = anEvent();
		const ops = await webhooks.addWebhook({ id: 'coord' }, { name: 'Ops room', url: fakeUrl('/hook/ops'), kinds: ['alert.significant', 'alert.update', 'alert.retraction'] });
		await webhooks.addWebhook({ id: 'coord' }, { name: 'Candidates room', url: fakeUrl('/hook/cands'), kinds: ['candidate.kilonova-like'] });
		const processed = { eventId, noticeId: 'n-1', ivorn: 'ivo://x#1', kind: 'preliminary' as const, role: 'observation' as const, significant: true, triage: 'follow' as never, latest: true };
		record(SYSTEM, 'notice.processed', 'board', processed);
		record(SYSTEM, 'notice.processed', `event:${eventId}`, processed); // the same action in a second room
		const t0 = new Date(Date.now() + 1000);
		expect(await webhooks.deliverDue(t0)).toBe(1);
		expect(await webhooks.deliverDue(new Date(t0.getTime() + 3600_000))).toBe(0);
		record(SYSTEM, 'notice.processed', 'board', { ...processed, noticeId: 'n-2', kind: 'initial' });
		record(SYSTEM, 'notice.processed', 'board', { ...processed, noticeId: 'n-3', kind: 'update', significant: false });
		expect(await webhooks.deliverDue(t0)).toBe(1);

		const caught = [...caughtWebhooks()].reverse();
		expect(caught.map((c) => c.path)).toEqual(['/hook/ops', '/hook/ops']);
		const [first, second] = caught.map((c) => c.json as { text: string; blocks: { text: { text: string } }[] });
		expect(first.text.split('\n')[0]).toBe('New significant alert: S261202xy');
		expect(first.text).toContain('Most probable source: BNS (93 %)');
		expect(first.text).toContain(`/events/${eventId}`);
		expect(first.blocks[0].text.text).toContain('*New significant alert: S261202xy*');
		expect(second.text.split('\n')[0]).toBe('Update to S261202xy');
		const rows = webhooks.listWebhooks().find((w) => w.id === ops)!.recent;
		expect(rows.every((r) => r.state === 'delivered' && r.attempts === 1 && r.lastStatus === 200)).toBe(true);
		stop();
	});

	it('retries a failed message after a doubling wait, then delivers it, and shows every step', async () => {
		const hook = await webhooks.addWebhook({ id: 'coord' }, { name: 'Ops', url: fakeUrl(), kinds: ['alert.retraction'] });
		const t0 = new Date('2026-12-02T12:00:00Z');
		webhooks.sendTest(hook, 'Nia Coord', t0);
		failNextWebhooks(2, 503);
		const at = (s: number) => new Date(t0.getTime() + s * 1000);
		const state = () => webhooks.listWebhooks()[0].recent[0];

		expect(await webhooks.deliverDue(t0)).toBe(0);
		expect(state()).toMatchObject({ state: 'pending', attempts: 1, lastStatus: 503, nextAttemptAt: at(WEBHOOK_RETRY_BASE_S).toISOString() });
		expect(state().lastError).toContain('503');
		expect(await webhooks.deliverDue(at(WEBHOOK_RETRY_BASE_S - 1))).toBe(0);
		expect(state().attempts).toBe(1);
		expect(await webhooks.deliverDue(at(WEBHOOK_RETRY_BASE_S))).toBe(0);
		expect(state()).toMatchObject({ attempts: 2, nextAttemptAt: at(WEBHOOK_RETRY_BASE_S * 3).toISOString() });
		expect(await webhooks.deliverDue(at(WEBHOOK_RETRY_BASE_S * 3))).toBe(1);
		expect(state()).toMatchObject({ state: 'delivered', attempts: 3, lastStatus: 200, lastError: null, nextAttemptAt: null });
		expect(caughtWebhooks().map((c) => c.status)).toEqual([200, 503, 503]);
		expect(await webhooks.deliverDue(at(10_000))).toBe(0);
		expect(caughtWebhooks()).toHaveLength(3);
	});

	it('gives up after the last attempt, and at once on a refusal that waiting will not mend', async () => {
		const hook = await webhooks.addWebhook({ id: 'coord' }, { name: 'Ops', url: fakeUrl(), kinds: ['alert.retraction'] });
		let t = new Date('2026-12-02T12:00:00Z').getTime();
		webhooks.sendTest(hook, 'Nia Coord', new Date(t));
		failNextWebhooks(100, 500);
		for (let i = 0; i < WEBHOOK_MAX_ATTEMPTS + 2; i++) {
			await webhooks.deliverDue(new Date(t));
			t += 3600_000;
		}
		expect(webhooks.listWebhooks()[0].recent[0]).toMatchObject({ state: 'failed', attempts: WEBHOOK_MAX_ATTEMPTS, nextAttemptAt: null });
		expect(caughtWebhooks()).toHaveLength(WEBHOOK_MAX_ATTEMPTS);

		clearCaughtWebhooks();
		webhooks.sendTest(hook, 'Nia Coord', new Date(t));
		failNextWebhooks(1, 404);
		await webhooks.deliverDue(new Date(t));
		const gone = webhooks.listWebhooks()[0].recent[0];
		expect(gone).toMatchObject({ state: 'failed', attempts: 1, lastStatus: 404 });
		expect(gone.lastError).toMatch(/no longer valid/);
	});

	it('tells of retractions, kilonova-like candidates, classifications and closings in our words, without private notes', async () => {
		const stop = installChatMessages();
		const eventId = anEvent();
		await webhooks.addWebhook({ id: 'coord' }, { name: 'All', url: fakeUrl(), kinds: ['alert.retraction', 'candidate.kilonova-like', 'candidate.classified', 'event.closed'] });
		record(SYSTEM, 'event.retracted', 'board', { eventId, noticeId: null, reason: 'instrumental glitch' });
		const ref = { candidateId: 'c-1', eventId, name: 'AT-7' };
		record(SYSTEM, 'candidate.kilonova-like', 'board', { ...ref, credibleLevel: 0.5, hostGalaxyId: null, reasons: ['Red colour: yes — g − r = 0.9'] });
		record(SYSTEM, 'candidate.classified', 'board', { ...ref, classificationId: 'cl-1', label: 'kilonova', confidence: 'high', redshift: 0.01, summary: 'PRIVATE NOTE', status: 'ok' });
		db.update(table.gwEvent).set({ state: 'closed', closedAt: new Date() }).run();
		record(SYSTEM, 'event.closed', 'board', { eventId, reason: 'search-complete', note: 'PRIVATE NOTE', by: 'Nia Coord' });
		expect(await webhooks.deliverDue(new Date())).toBe(4);
		const texts = [...caughtWebhooks()].reverse().map((c) => (c.json as { text: string }).text);
		expect(texts[0]).toMatch(/^Retracted: S261202xy\n.*Stop observations/);
		expect(texts[0]).toContain('Reason given: instrumental glitch');
		expect(texts[1]).toMatch(/^Kilonova-like candidate AT-7 for S261202xy/);
		expect(texts[1]).toContain(`/events/${eventId}/candidates/AT-7`);
		expect(texts[2]).toMatch(/^AT-7 \(S261202xy\) classified: kilonova\nConfidence: high\nRedshift: 0.01/);
		expect(texts[3]).toMatch(/^Closed: S261202xy \(search complete\)/);
		for (const t of texts) expect(t).not.toContain('PRIVATE');
		stop();
	});

	it('sends nothing about test events', async () => {
		const stop = installChatMessages();
		db.insert(table.gwEvent).values({ id: 'ev-t', sourceEventId: 'MS261202a', role: 'test' }).run();
		await webhooks.addWebhook({ id: 'coord' }, { name: 'All', url: fakeUrl(), kinds: ['alert.significant', 'alert.retraction'] });
		record(SYSTEM, 'event.retracted', 'board', { eventId: 'ev-t', noticeId: null, reason: null });
		expect(await webhooks.deliverDue(new Date())).toBe(0);
		stop();
	});

	it('shows the address masked', () => {
		expect(webhooks.maskedUrl('https://hooks.chat.example/services/T000/B000/SECRETSECRET')).toBe('https://hooks.chat.example/services/…');
	});
});
