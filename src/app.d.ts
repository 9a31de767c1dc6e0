import type { SessionUser, SessionInfo } from '$lib/server/people/auth';

declare global {
	namespace App {
		interface Error {
			message: string;
			code?: string;
			errorId?: string;
		}
		interface Locals {
			user: SessionUser | null;
			session: SessionInfo | null;
			/** Set when a robotic telescope's API token authenticated the request. */
			telescopeId: string | null;
		}
	}
}

export {};
