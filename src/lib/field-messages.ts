/**
 * Field messages in people's words. Zod's own messages ("Invalid input: expected string,
 * received undefined") and our field names (`observedAt`) never reach a person or an API client:
 * every schema message that a schema does not set itself is written here, naming the field as
 * the forms label it. Installed once for the process (zod's configuration is global) by
 * importing this module; schemas that set their own message keep it.
 */
import { z } from 'zod';

/** How the forms label each input; API and CSV messages name the fields the same way. */
export const FIELD_LABELS: Record<string, string> = {
	eventId: 'Event',
	telescopeId: 'Telescope',
	teamId: 'Team',
	observedAt: 'Time (UTC)',
	raDeg: 'RA (deg, J2000)',
	decDeg: 'Dec (deg, J2000)',
	positionErrArcsec: 'Position uncertainty (arcsec)',
	fieldId: 'Field id',
	filter: 'Filter',
	exposureS: 'Exposure (s)',
	limitingMag: 'Limiting magnitude (AB)',
	seeingArcsec: 'Seeing (arcsec)',
	notes: 'Notes',
	note: 'Note',
	name: 'Name',
	discoveredAt: 'Discovered (UTC)',
	magnitude: 'Magnitude (AB)',
	magnitudeErr: 'Magnitude error',
	targetKind: 'Target kind',
	targetId: 'Target',
	epoch: 'Epoch',
	action: 'Action',
	reason: 'Reason',
	email: 'E-mail',
	password: 'Password',
	roles: 'Roles',
	userId: 'Person',
	claimId: 'Claim',
	inboxId: 'Notice'
};

/** The label of the field an issue is about (its last named path step); unknown names are spelled out ("minAltitudeDeg" → "Min altitude deg"). */
export function fieldLabel(path: readonly PropertyKey[] | undefined): string {
	const key = [...(path ?? [])].reverse().find((p): p is string => typeof p === 'string');
	if (!key) return 'The request body';
	if (FIELD_LABELS[key]) return FIELD_LABELS[key];
	const words = key
		.replace(/([a-z0-9])([A-Z])/g, '$1 $2')
		.replace(/[_-]+/g, ' ')
		.toLowerCase();
	return words.charAt(0).toUpperCase() + words.slice(1);
}

const TYPE_WORDS: Record<string, string> = {
	number: 'a number',
	int: 'a whole number',
	string: 'text',
	boolean: 'true or false',
	array: 'a list',
	object: 'an object',
	date: 'a date'
};

type Issue = z.core.$ZodRawIssue;

const bound = (v: unknown) => (typeof v === 'bigint' ? v.toString() : String(v));

/** One sentence per issue, naming the field. */
export function messageFor(iss: Issue): string {
	const label = fieldLabel(iss.path);
	switch (iss.code) {
		case 'invalid_type': {
			if (iss.input === undefined || iss.input === null) return label === 'The request body' ? 'Send a JSON object.' : `${label} is missing.`;
			if (!iss.path?.length && iss.expected === 'object') return 'Send a JSON object.';
			return `${label} must be ${TYPE_WORDS[iss.expected] ?? iss.expected}.`;
		}
		case 'too_small': {
			if (iss.origin === 'string') return Number(iss.minimum) <= 1 ? `${label} cannot be empty.` : `${label} must be at least ${bound(iss.minimum)} characters.`;
			if (iss.origin === 'array' || iss.origin === 'set') return `${label} needs at least ${bound(iss.minimum)} item${Number(iss.minimum) === 1 ? '' : 's'}.`;
			return `${label} must be ${iss.inclusive ? 'at least' : 'greater than'} ${bound(iss.minimum)}.`;
		}
		case 'too_big': {
			if (iss.origin === 'string') return `${label} may be at most ${bound(iss.maximum)} characters.`;
			if (iss.origin === 'array' || iss.origin === 'set') return `${label} may have at most ${bound(iss.maximum)} items.`;
			return `${label} must be ${iss.inclusive ? 'at most' : 'less than'} ${bound(iss.maximum)}.`;
		}
		case 'invalid_format': {
			if (iss.format === 'datetime') return `${label} must be an ISO 8601 time, e.g. 2026-12-02T03:04:05Z.`;
			if (iss.format === 'email') return `${label} is not a valid e-mail address.`;
			if (iss.format === 'url') return `${label} must be a web address.`;
			return `${label} is not in the expected form.`;
		}
		case 'invalid_value': {
			if (iss.input === undefined) return `${label} is missing.`;
			const values = iss.values.map((v) => (typeof v === 'string' ? `“${v}”` : String(v)));
			return values.length === 1 ? `${label} must be ${values[0]}.` : `${label} must be one of ${values.join(', ')}.`;
		}
		case 'not_multiple_of':
			return `${label} must be a multiple of ${bound(iss.divisor)}.`;
		case 'unrecognized_keys':
			return `Unknown field${iss.keys.length === 1 ? '' : 's'}: ${iss.keys.join(', ')}.`;
		case 'invalid_union':
			return `${label} does not match any accepted form.`;
		case 'invalid_key':
		case 'invalid_element':
			return `${label} holds a value that is not accepted.`;
		default:
			return `${label} is not valid.`;
	}
}

z.config({ customError: messageFor });
