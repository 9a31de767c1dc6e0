import { describe, expect, it } from 'vitest';
import { mailParts } from './mail-view';

describe('mail text for the development mailbox', () => {
	it('splits text into text and link parts, the link only http(s) and ending at a space', () => {
		expect(mailParts('See https://a.test/events/abc then ftp://x.test and javascript:alert(1)')).toEqual([
			{ kind: 'text', text: 'See ' },
			{ kind: 'link', href: 'https://a.test/events/abc', text: 'https://a.test/events/abc' },
			{ kind: 'text', text: ' then ftp://x.test and javascript:alert(1)' }
		]);
	});

	it('keeps markup and quotes as text: a crafted link never becomes attributes', () => {
		const parts = mailParts('x https://e.test/"onfocus="alert(1)"autofocus=" <b>y</b>');
		expect(parts[1]).toEqual({ kind: 'link', href: 'https://e.test/%22onfocus=%22alert(1)%22autofocus=%22', text: 'https://e.test/"onfocus="alert(1)"autofocus="' });
		expect(parts[2]).toEqual({ kind: 'text', text: ' <b>y</b>' });
	});

	it('masks the secret in invitation and reset links, and any long token, and does not link them', () => {
		const token = 'abcdefghijklmnopqrstuvwxyz234567abcdefg';
		const text = `Here: http://h.test/reset/${token}\nand http://h.test/invitation/${token}.\nOther: http://h.test/x?code=${token}&a=1 and http://h.test/events/k2j4h5g6f7d8s9a0q1w2`;
		const parts = mailParts(text);
		const joined = parts.map((p) => p.text).join('');
		expect(joined).not.toContain(token);
		expect(joined).toContain('http://h.test/reset/••••••');
		expect(joined).toContain('http://h.test/invitation/••••••.');
		expect(joined).toContain('http://h.test/x?code=••••••&a=1');
		expect(parts.filter((p) => p.kind === 'link').map((p) => (p as { href: string }).href)).toEqual(['http://h.test/events/k2j4h5g6f7d8s9a0q1w2']);
	});

	it('a short path after /reset/ is still masked', () => {
		expect(mailParts('http://h.test/reset/abc').map((p) => p.text).join('')).toBe('http://h.test/reset/••••••');
	});
});
