import { describe, expect, it } from 'vitest';
import { echoValues, formObject } from './forms';

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
