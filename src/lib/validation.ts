import { z } from 'zod';
import { ROLES_LIST } from './roles';
import './field-messages';

/** Limits shared by the forms' HTML attributes and the server's checks. */
export const LIMITS = {
	nameMax: 80,
	emailMax: 254,
	passwordMin: 10,
	passwordMax: 200,
	textMax: 2000
} as const;

export const emailField = z
	.string({ error: 'Enter an e-mail address.' })
	.trim()
	.toLowerCase()
	.min(1, 'Enter an e-mail address.')
	.max(LIMITS.emailMax, `At most ${LIMITS.emailMax} characters.`)
	.pipe(z.email({ error: 'This is not a valid e-mail address.' }));

export const nameField = z
	.string({ error: 'Enter a name.' })
	.trim()
	.min(1, 'Enter a name.')
	.max(LIMITS.nameMax, `At most ${LIMITS.nameMax} characters.`);

export const newPasswordField = z
	.string({ error: 'Choose a password.' })
	.min(LIMITS.passwordMin, `Use at least ${LIMITS.passwordMin} characters.`)
	.max(LIMITS.passwordMax, `At most ${LIMITS.passwordMax} characters.`);

export const rolesField = z
	.array(z.enum(ROLES_LIST, { error: 'Unknown role.' }))
	.min(1, 'Choose at least one role.');

/** A number field from a form: empty → a clear message, not NaN. */
export function numberField(label: string, min: number, max: number, opts: { exclusiveMin?: boolean } = {}) {
	return z
		.string({ error: `Enter ${label}.` })
		.trim()
		.min(1, `Enter ${label}.`)
		.transform((s, ctx) => {
			const n = Number(s);
			if (!Number.isFinite(n)) {
				ctx.addIssue({ code: 'custom', message: `${label[0].toUpperCase()}${label.slice(1)} must be a number.` });
				return z.NEVER;
			}
			return n;
		})
		.refine((n) => (opts.exclusiveMin ? n > min : n >= min) && n <= max, {
			message: opts.exclusiveMin ? `Must be greater than ${min} and at most ${max}.` : `Must be between ${min} and ${max}.`
		});
}
