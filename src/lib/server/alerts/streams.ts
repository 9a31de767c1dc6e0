/**
 * Notice streams and their vocabularies: which Params carry the event id, kind, false-alarm rate,
 * classes, properties and map URL for each stream (the IVORN before "#", VOEvent 2.0 §2.2), the
 * unit of its false-alarm rate, and its rule for the event id in an IVORN's local part. A stream
 * without a row is read with the defaults (`DEFAULT_VOCABULARY`, today's names).
 *
 * Reading a notice also needs the events of the packets it cites: `citedEvent` looks them up
 * among the stored notices.
 */
import { desc, eq, sql } from 'drizzle-orm';
import { z } from 'zod';
import { db } from '../platform/db';
import * as table from '../platform/db/schema';
import { InputError } from '../platform/errors';
import {
	DEFAULT_VOCABULARY,
	NoticeParseError,
	NoticeWaitError,
	readVoevent,
	sniffIvorn,
	streamOf,
	vocabularySchema,
	VOCABULARY_FIELDS,
	type EventIdSource,
	type Notice,
	type NoticeVocabulary,
	type VocabularyField
} from '../../alerts/voevent.ts';

/** A stream identifier: an `ivo://` IVORN without the "#local" part. */
export const streamIdSchema = z
	.string({ error: 'Give the stream, as ivo://authority/path.' })
	.trim()
	.max(400, 'A stream identifier may be at most 400 characters.')
	.regex(/^ivo:\/\/[^\s#]+$/, 'A stream is written ivo://authority/path, without spaces and without the "#…" part of a notice.');

export interface StreamSummary {
	stream: string;
	/** The stream has a vocabulary of its own (otherwise the defaults apply). */
	configured: boolean;
	/** Notices received from it (inbox rows), and the latest time one arrived. */
	received: number;
	lastReceivedAt: string | null;
	updatedAt: string | null;
}

/** The vocabulary a stream is read with: its own, or the defaults. */
export function vocabularyFor(stream: string): NoticeVocabulary {
	const row = db.select({ vocabulary: table.noticeStream.vocabulary }).from(table.noticeStream).where(eq(table.noticeStream.stream, stream)).get();
	if (!row) return DEFAULT_VOCABULARY;
	// A row written by an older version may lack a field added since: the default fills it.
	return { ...DEFAULT_VOCABULARY, ...row.vocabulary, names: { ...DEFAULT_VOCABULARY.names, ...row.vocabulary.names } };
}

/** Streams with a vocabulary of their own and streams notices arrived from, configured ones first. */
export function listStreams(): StreamSummary[] {
	const streamExpr = sql<string>`case when instr(${table.noticeInbox.ivorn}, '#') > 0 then substr(${table.noticeInbox.ivorn}, 1, instr(${table.noticeInbox.ivorn}, '#') - 1) else ${table.noticeInbox.ivorn} end`;
	const seen = db
		.select({ stream: streamExpr, received: sql<number>`count(*)`, last: sql<number>`max(${table.noticeInbox.receivedAt})` })
		.from(table.noticeInbox)
		.where(sql`${table.noticeInbox.ivorn} like 'ivo://%'`)
		.groupBy(streamExpr)
		.orderBy(desc(sql`max(${table.noticeInbox.receivedAt})`))
		.limit(100)
		.all();
	const configured = db.select().from(table.noticeStream).all();
	const byStream = new Map<string, StreamSummary>();
	for (const c of configured) {
		byStream.set(c.stream, { stream: c.stream, configured: true, received: 0, lastReceivedAt: null, updatedAt: c.updatedAt.toISOString() });
	}
	for (const s of seen) {
		const entry = byStream.get(s.stream) ?? { stream: s.stream, configured: false, received: 0, lastReceivedAt: null, updatedAt: null };
		entry.received = s.received;
		entry.lastReceivedAt = s.last ? new Date(s.last).toISOString() : null;
		byStream.set(s.stream, entry);
	}
	return [...byStream.values()].sort((a, b) => Number(b.configured) - Number(a.configured) || (b.lastReceivedAt ?? '').localeCompare(a.lastReceivedAt ?? '') || a.stream.localeCompare(b.stream));
}

/** Store a stream's vocabulary (replacing the one it had). */
export function saveVocabulary(stream: string, vocabulary: NoticeVocabulary, userId: string | null, now = new Date()): void {
	const id = streamIdSchema.safeParse(stream);
	if (!id.success) throw new InputError(id.error.issues[0].message, 'stream');
	const checked = vocabularySchema.parse(vocabulary);
	db.insert(table.noticeStream)
		.values({ stream: id.data, vocabulary: checked, updatedBy: userId, updatedAt: now })
		.onConflictDoUpdate({ target: table.noticeStream.stream, set: { vocabulary: checked, updatedBy: userId, updatedAt: now } })
		.run();
}

/** Forget a stream's own vocabulary: it is read with the defaults again. */
export function resetVocabulary(stream: string): void {
	db.delete(table.noticeStream).where(eq(table.noticeStream.stream, stream)).run();
}

/** The source event id of a stored notice's event, by the notice's IVORN (null when not stored). */
export function citedEvent(ivorn: string): string | null {
	return (
		db
			.select({ sourceEventId: table.gwEvent.sourceEventId })
			.from(table.notice)
			.innerJoin(table.gwEvent, eq(table.gwEvent.id, table.notice.eventId))
			.where(eq(table.notice.ivorn, ivorn))
			.get()?.sourceEventId ?? null
	);
}

/** Read a notice with its stream's vocabulary and the stored notices it cites. Throws NoticeParseError / NoticeWaitError. */
export function readNotice(xml: string): { notice: Notice; stream: string; eventIdFrom: EventIdSource } {
	const ivorn = sniffIvorn(xml);
	const vocabulary = ivorn ? vocabularyFor(streamOf(ivorn)) : DEFAULT_VOCABULARY;
	return readVoevent(xml, { vocabulary, citedEvent });
}

// ── The editor's form ──

const namesText = () => z.string().max(2000, 'At most 2000 characters.').optional().default('');

/** One text box per field: names separated by commas or new lines. */
export const vocabularyForm = z.object({
	stream: streamIdSchema,
	farUnit: z.enum(['Hz', 'per-year'], { error: 'Choose the unit of the false-alarm rate.' }),
	eventIdFromIvorn: z.string().max(1000, 'At most 1000 characters.').optional().default(''),
	...(Object.fromEntries(VOCABULARY_FIELDS.map((f) => [f, namesText()])) as Record<VocabularyField, ReturnType<typeof namesText>>)
});

export type VocabularyFormValues = z.infer<typeof vocabularyForm>;

/** The form's text → a checked vocabulary, or an InputError naming the first field at fault. */
export function vocabularyFromForm(values: VocabularyFormValues): NoticeVocabulary {
	const names = Object.fromEntries(
		VOCABULARY_FIELDS.map((f) => [
			f,
			values[f]
				.split(/[,\n]/)
				.map((n) => n.trim())
				.filter(Boolean)
		])
	);
	const rule = values.eventIdFromIvorn.trim();
	const checked = vocabularySchema.safeParse({ names, farUnit: values.farUnit, eventIdFromIvorn: rule === '' ? null : rule });
	if (!checked.success) {
		const issue = checked.error.issues[0];
		const field = issue.path[0] === 'names' ? String(issue.path[1]) : String(issue.path[0]);
		throw new InputError(issue.message, field);
	}
	return checked.data;
}

/** The vocabulary as the form shows it (names joined by ", "). */
export function vocabularyToForm(stream: string, v: NoticeVocabulary): VocabularyFormValues {
	return {
		stream,
		farUnit: v.farUnit,
		eventIdFromIvorn: v.eventIdFromIvorn ?? '',
		...(Object.fromEntries(VOCABULARY_FIELDS.map((f) => [f, v.names[f].join(', ')])) as Record<VocabularyField, string>)
	};
}

export type PreviewResult =
	| { ok: true; notice: Notice; stream: string; eventIdFrom: EventIdSource; otherStream: boolean }
	| { ok: false; reason: string; waiting: boolean };

/**
 * Read a pasted notice with a vocabulary that is being edited, as ingestion would (the stored
 * notices it cites are looked up), and store nothing.
 */
export function previewNotice(xml: string, vocabulary: NoticeVocabulary, stream: string): PreviewResult {
	try {
		const r = readVoevent(xml, { vocabulary, citedEvent });
		return { ok: true, ...r, otherStream: r.stream !== stream };
	} catch (e) {
		if (e instanceof NoticeParseError) return { ok: false, reason: e.message, waiting: e instanceof NoticeWaitError };
		throw e;
	}
}
