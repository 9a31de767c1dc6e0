/**
 * The roster in people's calendars: a secret iCalendar (RFC 5545) address per person for their own
 * shifts, and one for the whole roster for coordinators. The secret is shown once and stored hashed
 * (SHA-256, as API tokens are); regenerating revokes the old address, and a revoked, unknown or no
 * longer permitted address answers 404.
 *
 * Times are written in UTC (`DTSTART:…Z`), as the roster is kept; the site's zone is named in
 * X-WR-TIMEZONE and in each shift's description, so a calendar shows local time correctly either way.
 */
import ical from 'ical-generator';
import { and, asc, eq, gt, isNull, lt } from 'drizzle-orm';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { config } from '../platform/config';
import { hashToken, randomId, randomToken, loadSessionUser } from '../people/auth';
import { can } from '../people/permissions';
import { CALENDAR_AHEAD_DAYS, CALENDAR_PAST_DAYS } from '../../limits';

export const CALENDAR_TOKEN_PREFIX = 'stlcal_';
export type FeedScope = table.CalendarFeed['scope'];

const DAY_MS = 86_400_000;

/** The permission each kind of feed needs, checked when it is made and again at every read. */
function mayHave(userId: string, scope: FeedScope): boolean {
	const user = loadSessionUser(userId);
	if (!user) return false;
	return can({ user }, scope === 'roster' ? 'calendar.roster' : 'calendar.own');
}

export function feedUrl(secret: string): string {
	return `${config.publicUrl}/calendar/${secret}.ics`;
}

/** Make (or make anew, revoking the old) the person's feed of `scope`. Returns its address: shown once. */
export function regenerateFeed(userId: string, scope: FeedScope, now = new Date()): { id: string; url: string } {
	const secret = CALENDAR_TOKEN_PREFIX + randomToken(24);
	const id = randomId();
	db.transaction((tx) => {
		tx.update(table.calendarFeed)
			.set({ revokedAt: now })
			.where(and(eq(table.calendarFeed.userId, userId), eq(table.calendarFeed.scope, scope), isNull(table.calendarFeed.revokedAt)))
			.run();
		tx.insert(table.calendarFeed).values({ id, userId, scope, tokenHash: hashToken(secret), prefix: secret.slice(0, 11) }).run();
	});
	return { id, url: feedUrl(secret) };
}

export function revokeFeed(userId: string, scope: FeedScope, now = new Date()): boolean {
	const res = db
		.update(table.calendarFeed)
		.set({ revokedAt: now })
		.where(and(eq(table.calendarFeed.userId, userId), eq(table.calendarFeed.scope, scope), isNull(table.calendarFeed.revokedAt)))
		.run();
	return res.changes > 0;
}

export interface FeedState {
	scope: FeedScope;
	prefix: string;
	createdAt: string;
	lastFetchedAt: string | null;
}

/** The person's live feeds (what the account page shows: never the secret). */
export function feedsOf(userId: string): FeedState[] {
	return db
		.select()
		.from(table.calendarFeed)
		.where(and(eq(table.calendarFeed.userId, userId), isNull(table.calendarFeed.revokedAt)))
		.all()
		.map((f) => ({ scope: f.scope, prefix: f.prefix, createdAt: f.createdAt.toISOString(), lastFetchedAt: f.lastFetchedAt?.toISOString() ?? null }));
}

interface ShiftRow {
	id: string;
	userId: string;
	name: string;
	startsAt: Date;
	endsAt: Date;
	rank: number;
	createdAt: Date;
}

function shiftsBetween(from: Date, to: Date, userId: string | null): ShiftRow[] {
	const overlap = and(lt(table.dutyShift.startsAt, to), gt(table.dutyShift.endsAt, from));
	return db
		.select({
			id: table.dutyShift.id,
			userId: table.dutyShift.userId,
			name: table.user.name,
			startsAt: table.dutyShift.startsAt,
			endsAt: table.dutyShift.endsAt,
			rank: table.dutyShift.rank,
			createdAt: table.dutyShift.createdAt
		})
		.from(table.dutyShift)
		.innerJoin(table.user, eq(table.user.id, table.dutyShift.userId))
		.where(userId ? and(overlap, eq(table.dutyShift.userId, userId)) : overlap)
		.orderBy(asc(table.dutyShift.startsAt), asc(table.dutyShift.rank))
		.all();
}

function callOrder(rank: number): string {
	return rank === 0 ? 'first to be paged' : `paged ${rank === 1 ? 'second' : rank === 2 ? 'third' : `at call order ${rank + 1}`}, if the one before does not answer`;
}

/** The calendar text for `shifts` (exported for tests). */
export function calendarText(o: { title: string; shifts: ShiftRow[]; withNames: boolean; siteTimeZone: string }): string {
	const cal = ical({ name: o.title, prodId: { company: 'Strainline', product: 'Duty roster', language: 'EN' }, ttl: 3600 });
	cal.x([{ key: 'X-WR-TIMEZONE', value: o.siteTimeZone }]);
	const zoneNote = `Times are in UTC; the site's time zone is ${o.siteTimeZone}.`;
	for (const s of o.shifts) {
		cal.createEvent({
			id: `shift-${s.id}@strainline`,
			start: s.startsAt,
			end: s.endsAt,
			stamp: s.createdAt,
			summary: o.withNames ? `Duty: ${s.name}${s.rank ? ` (back-up ${s.rank})` : ''}` : `Duty shift${s.rank ? ` (back-up ${s.rank})` : ''}`,
			description: `${o.withNames ? `${s.name}, ` : 'You are '}${callOrder(s.rank)}. ${zoneNote}\nRoster: ${config.publicUrl}/roster`,
			url: `${config.publicUrl}/roster`
		});
	}
	return cal.toString();
}

/**
 * The calendar behind a secret address, or null (unknown, revoked, or its owner may no longer
 * have it). Notes when it was last fetched.
 */
export function feedFor(secret: string, now = new Date()): { text: string; scope: FeedScope } | null {
	if (!secret.startsWith(CALENDAR_TOKEN_PREFIX) || secret.length > 100) return null;
	const feed = db
		.select()
		.from(table.calendarFeed)
		.where(and(eq(table.calendarFeed.tokenHash, hashToken(secret)), isNull(table.calendarFeed.revokedAt)))
		.get();
	if (!feed || !mayHave(feed.userId, feed.scope)) return null;
	db.update(table.calendarFeed).set({ lastFetchedAt: now }).where(eq(table.calendarFeed.id, feed.id)).run();
	const from = new Date(now.getTime() - CALENDAR_PAST_DAYS * DAY_MS);
	const to = new Date(now.getTime() + CALENDAR_AHEAD_DAYS * DAY_MS);
	const roster = feed.scope === 'roster';
	return {
		scope: feed.scope,
		text: calendarText({
			title: roster ? 'Strainline duty roster' : 'My Strainline duty shifts',
			shifts: shiftsBetween(from, to, roster ? null : feed.userId),
			withNames: roster,
			siteTimeZone: config.siteTimeZone
		})
	};
}

/** Make a feed after checking the person may have it. */
export function createFeedFor(userId: string, scope: FeedScope, now = new Date()): { id: string; url: string } | null {
	if (!mayHave(userId, scope)) return null;
	return regenerateFeed(userId, scope, now);
}
