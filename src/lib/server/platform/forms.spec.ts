import { describe, expect, it } from 'vitest';
import { echoValues, failFromError, formObject } from './forms';
import { DomainError, InputError } from './errors';

describe('form helpers', () => {
	it('echo what was typed but never a password or token', () => {
		const f = new FormData();
		f.set('email', 'a@b.test');
		f.set('password', 'secret');
		f.set('currentPassword', 'secret2');
		f.set('tokenName', 'x');
		f.append('roles', 'observer');
		f.append('roles', 'viewer');
		const v = echoValues(f);
		expect(v).toEqual({ email: 'a@b.test', roles: ['observer', 'viewer'] });
	});
	it('never echo the repeated password of the invitation, reset and account forms', () => {
		const f = new FormData();
		f.set('name', 'Nadia');
		f.set('password', 'short');
		f.set('confirm', 'other-secret');
		f.set('passwordConfirm', 'x');
		expect(echoValues(f)).toEqual({ name: 'Nadia' });
	});
	it('collect repeated fields as arrays only where asked, with empty arrays for none', () => {
		const f = new FormData();
		f.append('roles', 'viewer');
		expect(formObject(f, ['roles', 'teamIds'])).toEqual({ roles: ['viewer'], teamIds: [] });
		expect(formObject(f)).toEqual({ roles: 'viewer' });
	});
});

function typed(entries: Record<string, string>) {
	const f = new FormData();
	for (const [k, v] of Object.entries(entries)) f.set(k, v);
	return f;
}

describe('the form answer to a refusal', () => {
	it('puts a one-field refusal beside its field, keeps what was typed and never the password', () => {
		const f = typed({ email: 'a@b.test', currentPassword: 'hunter22', password: 'new-secret-1' });
		const r = failFromError(f, new InputError('The current password is not right.', 'currentPassword'));
		expect(r.status).toBe(400);
		expect(r.data).toEqual({ values: { email: 'a@b.test' }, errors: { currentPassword: 'The current password is not right.' }, message: undefined });
	});
	it('answers a broken rule (422) with 400 and the field messages only', () => {
		const e = new DomainError(422, 'invalid', 'magnitude: must be 5–30; filter: required', { magnitude: 'must be 5–30', filter: 'required' });
		const r = failFromError(typed({ magnitude: '40' }), e);
		expect(r.status).toBe(400);
		expect(r.data.errors).toEqual({ magnitude: 'must be 5–30', filter: 'required' });
		expect(r.data.message).toBeUndefined();
		expect(r.data.values).toEqual({ magnitude: '40' });
	});
	it('keeps the status and the sentence of a refusal that also names a field', () => {
		const e = new DomainError(409, 'name_taken', 'Candidate AN-1 is already reported by Basalt Ridge.', { name: 'taken by Basalt Ridge' });
		const r = failFromError(typed({ name: 'AN-1' }), e);
		expect(r.status).toBe(409);
		expect(r.data).toEqual({ values: { name: 'AN-1' }, errors: { name: 'taken by Basalt Ridge' }, message: 'Candidate AN-1 is already reported by Basalt Ridge.' });
	});
	it('puts a refusal about no field at the top, or beside the field the page names', () => {
		const gone = failFromError(typed({ name: 'Ann' }), new InputError('This invitation link is no longer valid.', undefined, 410, 'gone'));
		expect(gone.status).toBe(410);
		expect(gone.data).toEqual({ values: { name: 'Ann' }, errors: {}, message: 'This invitation link is no longer valid.' });
		const beside = failFromError(typed({ lapseMinutes: '30' }), new DomainError(403, 'forbidden', 'Only a coordinator may set the lapse time.'), { field: 'lapseMinutes' });
		expect(beside.status).toBe(403);
		expect(beside.data).toEqual({ values: { lapseMinutes: '30' }, errors: { lapseMinutes: 'Only a coordinator may set the lapse time.' }, message: undefined });
	});
	it('adds what the page needs besides, and answers 400 for a status that is not a 4xx', () => {
		const r = failFromError(typed({ claimId: 'c1' }), new DomainError(502, 'network', 'sky-map download failed'), { extra: { target: 'galaxy:7' } });
		expect(r.status).toBe(400);
		expect(r.data).toEqual({ target: 'galaxy:7', values: { claimId: 'c1' }, errors: {}, message: 'sky-map download failed' });
	});
	it('rethrows anything that is not a refusal', () => {
		const bug = new TypeError('x is undefined');
		expect(() => failFromError(new FormData(), bug)).toThrow(bug);
	});
});
