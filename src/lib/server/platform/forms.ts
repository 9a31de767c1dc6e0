import { fail, type ActionFailure } from '@sveltejs/kit';
import { z } from 'zod';
import { DomainError } from './errors';
import '../../field-messages';

export type FieldErrors = Record<string, string>;

export interface FormFailure {
	values: Record<string, string | string[]>;
	errors: FieldErrors;
	message?: string;
}

// `confirm` is the repeated password of the invitation, reset and account forms.
const SECRET_FIELD = /password|token|secret|confirm/i;

/** What the person typed, to put back in the form (never a password or token). */
export function echoValues(form: FormData): Record<string, string | string[]> {
	const values: Record<string, string | string[]> = {};
	for (const key of new Set(form.keys())) {
		if (SECRET_FIELD.test(key)) continue;
		const all = form.getAll(key).filter((v): v is string => typeof v === 'string');
		values[key] = all.length > 1 || key.endsWith('[]') ? all : (all[0] ?? '');
	}
	return values;
}

/** Plain object from a form: repeated keys (checkboxes) become arrays when `arrays` names them. */
export function formObject(form: FormData, arrays: readonly string[] = []): Record<string, unknown> {
	const out: Record<string, unknown> = {};
	for (const key of new Set(form.keys())) {
		const all = form.getAll(key).filter((v): v is string => typeof v === 'string');
		out[key] = arrays.includes(key) ? all : all[0];
	}
	for (const key of arrays) out[key] ??= [];
	return out;
}

export function issuesToErrors(error: z.ZodError): FieldErrors {
	const errors: FieldErrors = {};
	for (const issue of error.issues) {
		const key = issue.path.length ? String(issue.path[0]) : '_form';
		errors[key] ??= issue.message;
	}
	return errors;
}

/**
 * Validate a submitted form. On failure returns the `fail(400, …)` to hand back from the action,
 * with field-level messages and the values typed (secrets left out).
 */
export async function validateForm<S extends z.ZodType>(
	request: Request,
	schema: S,
	arrays: readonly string[] = []
): Promise<{ data: z.infer<S>; form: FormData; failure?: never } | { failure: ActionFailure<FormFailure>; data?: never; form: FormData }> {
	let form: FormData;
	try {
		form = await request.formData();
	} catch {
		return { failure: fail(400, { values: {}, errors: {}, message: 'The form could not be read.' }), form: new FormData() };
	}
	const parsed = schema.safeParse(formObject(form, arrays));
	if (!parsed.success) {
		return { failure: fail(400, { values: echoValues(form), errors: issuesToErrors(parsed.error) }), form };
	}
	return { data: parsed.data, form };
}

export function failWith(form: FormData, errors: FieldErrors, status = 400, message?: string) {
	return fail(status, { values: echoValues(form), errors, message } satisfies FormFailure);
}

/**
 * The form action's answer to a refusal from a domain module: `fail(status, { values, errors, message })`
 * with what the person typed (never a password or token). Anything that is not a DomainError is
 * rethrown, so an unexpected failure still reaches `handleError`.
 * - A 422 (the input broke a rule) answers 400, as a form the schema refused does.
 * - The per-field messages go beside their fields; a refusal about no field goes beside `o.field`
 *   when given, otherwise at the top.
 * - The sentence at the top is left out when the field messages already say it (an input error
 *   with fields, or a refusal placed beside `o.field`).
 * - `o.extra` adds what the page needs besides (the target a claim was for).
 */
export function failFromError<Extra extends Record<string, unknown> = Record<never, never>>(
	form: FormData,
	e: unknown,
	o: { field?: string; extra?: Extra } = {}
): ActionFailure<FormFailure & Extra> {
	if (!(e instanceof DomainError)) throw e;
	const status = e.status === 422 ? 400 : e.status >= 400 && e.status < 500 ? e.status : 400;
	const hasFields = Object.keys(e.fields).length > 0;
	const errors: FieldErrors = hasFields ? { ...e.fields } : o.field ? { [o.field]: e.message } : {};
	const saidByFields = hasFields ? status === 400 : Boolean(o.field);
	const body = { ...(o.extra as Extra), values: echoValues(form), errors, message: saidByFields ? undefined : e.message };
	return fail(status, body as FormFailure & Extra);
}

/** An empty input is absent; a number stays a string when it does not parse, so the schema names the field. */
export function formNumber(v: FormDataEntryValue | null): number | string | undefined {
	const s = typeof v === 'string' ? v.trim() : '';
	if (s === '') return undefined;
	const n = Number(s);
	return Number.isFinite(n) ? n : s;
}

/** Trimmed text, absent when empty. */
export function formText(v: FormDataEntryValue | null): string | undefined {
	const s = typeof v === 'string' ? v.trim() : '';
	return s === '' ? undefined : s;
}

/** Times are UTC: a time typed without an offset gets 'Z' rather than the server's zone. */
export function formUtc(v: string | undefined): string | undefined {
	if (!v) return v;
	const t = v.replace(' ', 'T');
	const withSeconds = /T\d\d:\d\d$/.test(t) ? `${t}:00` : t;
	return /(Z|[+-]\d\d:?\d\d)$/i.test(withSeconds) ? withSeconds : `${withSeconds}Z`;
}
