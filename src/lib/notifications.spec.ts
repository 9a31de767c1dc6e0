import { describe, expect, it } from 'vitest';
import {
	CHOOSABLE_KINDS,
	decideDelivery,
	DEFAULT_PREFERENCES,
	inQuietHours,
	NOTIFICATION_KINDS,
	quietHoursEnd,
	type NotificationPreferences,
	type QuietHours
} from './notifications.ts';

const prefs = (p: Partial<NotificationPreferences>): NotificationPreferences => ({ ...DEFAULT_PREFERENCES, kinds: {}, ...p });
const nightUtc: QuietHours = { start: '22:00', end: '07:00', timeZone: 'UTC', action: 'hold' };

describe('decideDelivery', () => {
	it('sends everything at once with the defaults (what the app did before preferences)', () => {
		expect.hasAssertions();
		for (const kind of NOTIFICATION_KINDS) expect(decideDelivery(DEFAULT_PREFERENCES, kind, 'BBH', new Date('2026-12-02T03:00:00Z'))).toBe('now');
	});

	it('never silences or delays duty pages: everything off, quiet hours now, other classes followed', () => {
		expect.hasAssertions();
		const strict = prefs({
			kinds: Object.fromEntries(CHOOSABLE_KINDS.map((k) => [k, 'off'])),
			eventClasses: ['BNS'],
			quietHours: { ...nightUtc, action: 'digest' }
		});
		const night = new Date('2026-12-02T03:00:00Z');
		expect(inQuietHours(strict.quietHours, night)).toBe(true);
		expect(decideDelivery(strict, 'duty.page', 'BBH', night)).toBe('now');
		expect(decideDelivery(strict, 'duty.stand-down', 'Terrestrial', night)).toBe('now');
		// The same person's other mail is off.
		expect(decideDelivery(strict, 'claim.lapsed', 'BNS', night)).toBe('none');
	});

	it('holds mail during quiet hours that run across midnight, and only then', () => {
		const p = prefs({ quietHours: nightUtc });
		const at = (iso: string) => decideDelivery(p, 'candidate.classified', 'BNS', new Date(iso));
		expect(at('2026-12-02T21:59:00Z')).toBe('now');
		expect(at('2026-12-02T22:00:00Z')).toBe('later');
		expect(at('2026-12-02T23:59:00Z')).toBe('later');
		expect(at('2026-12-03T00:00:00Z')).toBe('later');
		expect(at('2026-12-03T06:59:00Z')).toBe('later');
		expect(at('2026-12-03T07:00:00Z')).toBe('now');
		expect(at('2026-12-03T12:00:00Z')).toBe('now');
	});

	it('reads quiet hours in a named zone (Santiago is UTC−3 in December)', () => {
		const p = prefs({ quietHours: { ...nightUtc, timeZone: 'America/Santiago' } });
		// 02:00 UTC = 23:00 in Santiago (quiet); 11:00 UTC = 08:00 (awake); 09:30 UTC = 06:30 (quiet).
		expect(decideDelivery(p, 'claims.moved', null, new Date('2026-12-02T02:00:00Z'))).toBe('later');
		expect(decideDelivery(p, 'claims.moved', null, new Date('2026-12-02T11:00:00Z'))).toBe('now');
		expect(decideDelivery(p, 'claims.moved', null, new Date('2026-12-02T09:30:00Z'))).toBe('later');
	});

	it('puts quiet-hours mail in the digest when asked to, and digest kinds always there', () => {
		const p = prefs({ quietHours: { ...nightUtc, action: 'digest' }, kinds: { 'claim.lapsed': 'digest' } });
		expect(decideDelivery(p, 'candidate.kilonova-like', 'BNS', new Date('2026-12-02T23:00:00Z'))).toBe('digest');
		expect(decideDelivery(p, 'candidate.kilonova-like', 'BNS', new Date('2026-12-02T12:00:00Z'))).toBe('now');
		expect(decideDelivery(p, 'claim.lapsed', 'BNS', new Date('2026-12-02T12:00:00Z'))).toBe('digest');
	});

	it('filters by the event’s most probable class, keeps events without one, and never filters or delays safety notices', () => {
		const p = prefs({ eventClasses: ['BNS', 'NSBH'], quietHours: nightUtc });
		const noon = new Date('2026-12-02T12:00:00Z');
		expect(decideDelivery(p, 'candidate.classified', 'BBH', noon)).toBe('none');
		expect(decideDelivery(p, 'candidate.classified', 'NSBH', noon)).toBe('now');
		expect(decideDelivery(p, 'candidate.classified', null, noon)).toBe('now');
		expect(decideDelivery(p, 'claims.retracted', 'BBH', new Date('2026-12-02T23:00:00Z'))).toBe('now');
		expect(decideDelivery(prefs({ kinds: { 'claims.retracted': 'off' } }), 'claims.retracted', 'BNS', noon)).toBe('none');
	});
});

describe('quietHoursEnd', () => {
	it('is the next local end time, across midnight', () => {
		expect(quietHoursEnd(nightUtc, new Date('2026-12-02T23:30:20Z')).toISOString()).toBe('2026-12-03T07:00:00.000Z');
		expect(quietHoursEnd(nightUtc, new Date('2026-12-03T03:00:00Z')).toISOString()).toBe('2026-12-03T07:00:00.000Z');
		const santiago = { ...nightUtc, timeZone: 'America/Santiago' };
		// 23:00 local on 1 December → 07:00 local = 10:00 UTC on 2 December.
		expect(quietHoursEnd(santiago, new Date('2026-12-02T02:00:00Z')).toISOString()).toBe('2026-12-02T10:00:00.000Z');
	});

	it('lands on the wall-clock end on the night the clocks go back', () => {
		// Madrid leaves summer time on Sunday 25 October 2026 at 01:00 UTC (EU rule: last Sunday of
		// October; common practice). 23:00 CEST on the 24th is 21:00 UTC; 07:00 CET on the 25th is 06:00 UTC.
		const madrid = { ...nightUtc, timeZone: 'Europe/Madrid' };
		expect(quietHoursEnd(madrid, new Date('2026-10-24T21:00:00Z')).toISOString()).toBe('2026-10-25T06:00:00.000Z');
	});
});
