import { describe, expect, it } from 'vitest';
import { channelProblems, sendChannels, toE164 } from './page-channels';

describe('E.164 numbers', () => {
	it('keeps international numbers, dropping only spaces, dots, dashes and brackets (ITU-T E.164: at most 15 digits, country code not starting with 0)', () => {
		expect.hasAssertions();
		expect(toE164('+34 600 12-34-56')).toBe('+34600123456');
		expect(toE164('(+44) 20.7946.0000')).toBe('+442079460000');
		expect(toE164('+1 555 0100')).toBe('+15550100');
		expect(toE164('+999999999999999')).toBe('+999999999999999');
		for (const bad of ['600123456', '0034600123456', '+0600123456', '+1234567890123456', '+34 600 abc', '+34#600123456', '+12345', ' ', 'x'.repeat(50)]) {
			expect(toE164(bad), bad).toBeNull();
		}
	});
});

describe('channels of a page', () => {
	it('refuses fewer than two channels for a duty scientist’s duty pages, and phone channels without a verified number', () => {
		expect.hasAssertions();
		expect(channelProblems({ 'duty.page': ['sms'] }, { verifiedPhone: true, dutyScientist: true })['duty.page']).toMatch(/two ways/);
		expect(channelProblems({ 'duty.page': ['sms', 'sms'] }, { verifiedPhone: true, dutyScientist: true })['duty.page']).toMatch(/two ways/);
		expect(channelProblems({ 'duty.page': ['sms'] }, { verifiedPhone: true, dutyScientist: false })).toEqual({});
		expect(channelProblems({ 'duty.page': ['email', 'voice'] }, { verifiedPhone: true, dutyScientist: true })).toEqual({});
		expect(channelProblems({ 'duty.page': ['email', 'voice'] }, { verifiedPhone: false, dutyScientist: true })['duty.page']).toMatch(/verified phone/);
		expect(channelProblems({ 'duty.stand-down': [] }, { verifiedPhone: true, dutyScientist: false })['duty.stand-down']).toMatch(/at least one/);
	});

	it('sends a duty page by e-mail plus another channel whatever is stored, and never by phone without a number', () => {
		expect.hasAssertions();
		expect(sendChannels({}, 'duty.page', { verifiedPhone: true })).toEqual(['email', 'sms']);
		expect(sendChannels({ 'duty.page': ['voice'] }, 'duty.page', { verifiedPhone: true })).toEqual(['email', 'voice']);
		expect(sendChannels({ 'duty.page': ['sms', 'voice'] }, 'duty.page', { verifiedPhone: false })).toEqual(['email']);
		expect(sendChannels({ 'duty.stand-down': ['voice'] }, 'duty.stand-down', { verifiedPhone: true })).toEqual(['voice']);
		expect(sendChannels({}, 'duty.stand-down', { verifiedPhone: true })).toEqual(['email']);
	});
});
