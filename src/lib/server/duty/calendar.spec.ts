import { beforeEach, describe, expect, it } from 'vitest';
import ICAL from 'ical.js';
import { eq } from 'drizzle-orm';
import { createTestDatabase } from '../platform/testing/database';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import * as calendar from './calendar';

// Parsed back with ical.js (Mozilla's RFC 5545 parser), a different library from the one that writes the feed.

const now = new Date('2026-12-02T12:00:00Z');

function person(id: string, name: string, role: table.Role) {
	db.insert(table.user).values({ id, email: `${id}@cal.test`, name, passwordHash: 'unused' }).run();
	db.insert(table.userRole).values({ userId: id, role }).run();
}

function shift(id: string, userId: string, startsAt: string, endsAt: string, rank = 0) {
	db.insert(table.dutyShift)
		.values({ id, userId, startsAt: new Date(startsAt), endsAt: new Date(endsAt), rank, handoverNote: 'PRIVATE hand-over', createdAt: new Date('2026-11-30T09:15:00Z') })
		.run();
}

function secretOf(url: string): string {
	return url.match(/\/calendar\/(stlcal_[^/]+)\.ics$/)![1];
}

function parse(text: string) {
	const cal = new ICAL.Component(ICAL.parse(text));
	return { cal, events: cal.getAllSubcomponents('vevent') };
}

beforeEach(() => {
	createTestDatabase();
	person('duty-1', 'Tomás Ibarra', 'duty');
	person('duty-2', 'Ines Kovač', 'duty');
	person('coord', 'Nia Coord', 'coordinator');
	person('viewer', 'Vic Viewer', 'viewer');
	shift('sh-a', 'duty-1', '2026-12-03T18:00:00Z', '2026-12-04T06:00:00Z');
	shift('sh-b', 'duty-2', '2026-12-03T18:00:00Z', '2026-12-04T06:00:00Z', 1);
	shift('sh-c', 'duty-1', '2026-12-05T18:00:00Z', '2026-12-06T06:00:00Z');
	shift('sh-old', 'duty-1', '2026-09-01T18:00:00Z', '2026-09-02T06:00:00Z');
});

describe('calendar feeds', () => {
	it('gives a person their own shifts, field by field, in UTC with the site zone named', () => {
		const { url } = calendar.createFeedFor('duty-1', 'mine', now)!;
		expect(url).toMatch(new RegExp(`^${config.publicUrl}/calendar/stlcal_[A-Za-z0-9_-]+\\.ics$`));
		const feed = calendar.feedFor(secretOf(url), now)!;
		if (process.env.SHOW_ICS) console.log(feed.text);
		expect(feed.text).toMatch(/^BEGIN:VCALENDAR\r\n/);
		expect(feed.text).toContain('\r\nDTSTART:20261203T180000Z\r\n');
		const { cal, events } = parse(feed.text);
		expect(cal.getFirstPropertyValue('version')).toBe('2.0');
		expect(cal.getFirstPropertyValue('x-wr-timezone')).toBe(config.siteTimeZone);
		expect(cal.getFirstPropertyValue('prodid')).toContain('Strainline');
		expect(events).toHaveLength(2); // the September shift is outside the window; Ines's is not hers
		const [first, second] = events.map((e) => new ICAL.Event(e));
		expect(first.uid).toBe('shift-sh-a@strainline');
		expect(second.uid).toBe('shift-sh-c@strainline');
		expect(first.startDate.toString()).toBe('2026-12-03T18:00:00Z');
		expect(first.startDate.zone.tzid).toBe('UTC');
		expect(first.endDate.toString()).toBe('2026-12-04T06:00:00Z');
		expect(first.summary).toBe('Duty shift');
		expect(first.description).toContain(`Times are in UTC; the site's time zone is ${config.siteTimeZone}.`);
		expect(first.description).not.toContain('PRIVATE');
		expect(events[0].getFirstPropertyValue('dtstamp')!.toString()).toBe('2026-11-30T09:15:00Z');

		// The UID and DTSTAMP do not change from one fetch to the next.
		const again = parse(calendar.feedFor(secretOf(url), new Date(now.getTime() + 3600_000))!.text).events;
		expect(again.map((e) => e.getFirstPropertyValue('uid'))).toEqual(['shift-sh-a@strainline', 'shift-sh-c@strainline']);
		expect(again[0].getFirstPropertyValue('dtstamp')!.toString()).toBe('2026-11-30T09:15:00Z');
	});

	it('gives a coordinator the whole roster with names and call order', () => {
		const { url } = calendar.createFeedFor('coord', 'roster', now)!;
		const events = parse(calendar.feedFor(secretOf(url), now)!.text).events.map((e) => new ICAL.Event(e));
		expect(events.map((e) => e.summary)).toEqual(['Duty: Tomás Ibarra', 'Duty: Ines Kovač (back-up 1)', 'Duty: Tomás Ibarra']);
		expect(events[1].description).toContain('paged second');
	});

	it('refuses the whole roster to those who are not coordinators, now and later', () => {
		expect(calendar.createFeedFor('viewer', 'roster', now)).toBeNull();
		expect(calendar.createFeedFor('viewer', 'mine', now)).not.toBeNull();
		const { url } = calendar.createFeedFor('coord', 'roster', now)!;
		db.update(table.userRole).set({ role: 'viewer' }).where(eq(table.userRole.userId, 'coord')).run();
		expect(calendar.feedFor(secretOf(url), now)).toBeNull();
	});

	it('answers nothing for a revoked, replaced or unknown address, and stores only the hash', () => {
		const first = calendar.createFeedFor('duty-1', 'mine', now)!;
		const second = calendar.regenerateFeed('duty-1', 'mine', now);
		expect(calendar.feedFor(secretOf(first.url), now)).toBeNull();
		expect(calendar.feedFor(secretOf(second.url), now)).not.toBeNull();
		const rows = db.select().from(table.calendarFeed).all();
		expect(rows.map((r) => r.tokenHash).join()).not.toContain(secretOf(second.url));
		expect(calendar.feedsOf('duty-1')).toHaveLength(1);
		expect(calendar.revokeFeed('duty-1', 'mine', now)).toBe(true);
		expect(calendar.feedFor(secretOf(second.url), now)).toBeNull();
		expect(calendar.feedsOf('duty-1')).toHaveLength(0);
		expect(calendar.feedFor('stlcal_nothing', now)).toBeNull();
		expect(calendar.feedFor('not-ours', now)).toBeNull();
	});
});
