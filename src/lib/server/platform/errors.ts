/** A refusal a route turns into its HTTP answer: status, a stable code for programs, the sentence for people, and per-field messages. */
export class DomainError extends Error {
	constructor(
		readonly status: number,
		readonly code: string,
		message: string,
		readonly fields: Record<string, string> = {}
	) {
		super(message);
	}
}

/**
 * A refusal of what someone typed or chose: 400 'invalid' unless told otherwise, with the
 * message shown beside `field` when the refusal is about one field.
 */
export class InputError extends DomainError {
	constructor(
		message: string,
		readonly field?: string,
		status = 400,
		code = 'invalid'
	) {
		super(status, code, message, field ? { [field]: message } : {});
	}
}

/** A refusal for asking too often: 429, with the seconds to wait before asking again (sent as Retry-After). */
export class RateLimitError extends DomainError {
	constructor(
		message: string,
		readonly retryAfterS: number
	) {
		super(429, 'too_many_requests', message);
	}
}
