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
