/**
 * The limits the product applies, in one place: the server enforces them and pages that state
 * them to people import them from here. Pure: no I/O, no server imports.
 */

/** A claim not started within this many minutes lapses; coordinators choose a value in this range (24 h at most). */
export const LAPSE_MINUTES_MIN = 5;
export const LAPSE_MINUTES_MAX = 1440;

/** Rows per page in the event's ranked galaxy and field tables. */
export const TARGETS_PAGE_SIZE = 25;

/** Ranked galaxies the API returns when `limit` is not given. */
export const API_GALAXIES_DEFAULT_LIMIT = 100;

/** Largest JSON body the API reads. */
export const API_JSON_MAX_BYTES = 256 * 1024;

/** Largest CSV of pointings a program may POST to the API. */
export const API_OBSERVATION_CSV_MAX_BYTES = 1024 * 1024;

/** Largest CSV of pointings the report page takes (stated in MB on the page). */
export const FORM_OBSERVATION_CSV_MAX_BYTES = 2_000_000;

/** Largest galaxy catalogue upload, bytes; the file is streamed, never held whole (server.js sets the node server's own body limit). */
export const CATALOG_MAX_BYTES = 200 * 1024 * 1024;

/** Longest single record (one galaxy's line) a catalogue may have: beyond it, a quote was surely left open. */
export const CATALOG_RECORD_MAX_BYTES = 1024 * 1024;

/** Bytes of a catalogue file read in one work-pool task (≈ 14,000 galaxy rows); the file is read part by part. */
export const CATALOG_PART_BYTES = 1024 * 1024;

/**
 * A re-ranking (new sky map or catalogue) e-mails a team about a target it holds an open claim on
 * when the target moved at least this many places, its probability changed by at least this
 * fraction of its old value (either way), or it left the ranking altogether.
 */
export const RERANK_NOTABLE_PLACES = 5;
export const RERANK_NOTABLE_PROBABILITY_CHANGE = 0.5;

/** Entries per page of an event's timeline. */
export const TIMELINE_PAGE_SIZE = 100;

/** Wait after the replay slider stops moving before asking the server for that moment, ms. */
export const REPLAY_DEBOUNCE_MS = 250;

/** Longest coordinator's note on an event's record, characters. */
export const RECORD_NOTE_MAX_CHARS = 4000;

/** Longest note a coordinator may give when closing or reopening an event. */
export const CLOSE_NOTE_MAX_CHARS = 2000;

/** Closed events per page in the archive. */
export const ARCHIVE_PAGE_SIZE = 20;

/**
 * Largest position uncertainty (radius, arcsec) a candidate may be reported with. Optical
 * astrometry of a transient is good to well under an arcsecond against a reference catalogue, and
 * a wide-field camera with arcsecond-scale pixels states a few arcseconds (common practice); a
 * minute of arc is already more than the 2″ duplicate check and a slit could use.
 */
export const POSITION_ERR_ARCSEC_MAX = 60;

/**
 * Heavy tasks (sky maps, rankings, plans, spectra) that may wait for a worker thread of the work
 * pool; one more is refused with 503 at once. Each waiting task holds its input (a sky map of up
 * to SKYMAP_MAX_MB), so the queue is short.
 */
export const WORK_QUEUE_MAX = 32;

/** Chat webhooks: at most this many, with a name and an address of at most these lengths. */
export const WEBHOOKS_MAX = 20;
export const WEBHOOK_NAME_MAX = 80;
export const WEBHOOK_URL_MAX = 2000;
/**
 * A failed delivery is tried again after RETRY_BASE_S, then twice as long each time (30 s, 1 min,
 * 2 min, 4 min, 8 min), and given up after MAX_ATTEMPTS attempts in all.
 */
export const WEBHOOK_MAX_ATTEMPTS = 6;
export const WEBHOOK_RETRY_BASE_S = 30;
/** One delivery attempt waits this long for the chat product's answer. */
export const WEBHOOK_TIMEOUT_S = 10;
/** Longest message text we send (chat products cut or refuse longer ones). */
export const WEBHOOK_TEXT_MAX = 3000;
/** Largest body the local fake receiver accepts. */
export const FAKE_WEBHOOK_BODY_MAX_BYTES = 64 * 1024;

/** A calendar feed holds the shifts from this many days back to this many days ahead. */
export const CALENDAR_PAST_DAYS = 30;
export const CALENDAR_AHEAD_DAYS = 180;

/**
 * What the event page sends of a busy event (it stays small however many pointings there are):
 * replay "changes" (one per slice of the slider), points per coverage curve (a chart a few
 * hundred pixels wide), and observed footprints drawn on the sky (repeats of one pointing drawn
 * once; beyond this many, the latest are drawn and the count of the rest is stated).
 */
export const REPLAY_MOMENTS_MAX = 400;
export const COVERAGE_CURVE_POINTS_MAX = 300;
export const SKY_FOOTPRINTS_MAX = 300;

/**
 * Event pages built for everyone and kept per change of the event (closeout/event-page.ts): how
 * many events at once (a night has a handful), and how long at most, so that a change written
 * without a log entry (a direct database repair) still shows within a minute.
 */
export const PAGE_CACHE_EVENTS = 16;
export const PAGE_CACHE_TTL_MS = 60_000;
/** The board's shared part (alerts/board.ts boardNow): events leave it by the clock too, so kept shorter. */
export const BOARD_CACHE_TTL_MS = 10_000;

/** Pointings per page on an event's "Our claims and pointings" page. */
export const WORK_POINTINGS_PAGE_SIZE = 100;

/** Page deliveries (e-mail, text, voice): sending tries at most this many times, waiting `PAGE_RETRY_BASE_S` × 2^(attempt−1) between tries. */
export const PAGE_SEND_MAX_ATTEMPTS = 5;
export const PAGE_RETRY_BASE_S = 15;

/** A text message body we send or accept, characters (10 SMS segments of 160 GSM characters would be 1,600). */
export const PHONE_TEXT_MAX_CHARS = 1600;

/** Phone verification: the code sent by text is valid this long and may be tried this many times. */
export const PHONE_CODE_LIFETIME_MIN = 15;
export const PHONE_CODE_MAX_TRIES = 5;
/** A new code may be asked for this many seconds after the last one. */
export const PHONE_CODE_RESEND_S = 60;

/** An acknowledgement link (and its reply code) works this long after the page is sent. */
export const ACK_LINK_LIFETIME_H = 24;

/** Largest inbound-hook body read, bytes. */
export const PHONE_INBOUND_MAX_BYTES = 16 * 1024;

/** Text replies the inbound hook takes from one number in a minute: one reply acknowledges a page, so more than ten is a script or two auto-responders in a loop. */
export const PHONE_REPLIES_PER_NUMBER_PER_MIN = 10;
/** Text replies the inbound hook takes from one client address in a minute: the messaging service relays everyone's replies from its own few addresses, so this leaves room for a whole roster answering at once. */
export const PHONE_REPLIES_PER_ADDRESS_PER_MIN = 60;

/** How long the browser keeps a sky map's display raster (s): it never changes under the map's id. */
export const SKY_RASTER_MAX_AGE_S = 7 * 24 * 3600;
