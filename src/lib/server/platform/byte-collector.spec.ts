import { describe, expect, it } from 'vitest';
import { ByteCollector } from './byte-collector';

const pieces = (sizes: number[]) => {
	let k = 0;
	return sizes.map((n) => Buffer.from(Array.from({ length: n }, () => k++ % 251)));
};

describe('collecting a download', () => {
	it('gives the same bytes as concatenating, with or without a declared size, and a wrong one', async () => {
		const parts = pieces([1, 65_536, 7, 300_000, 12]);
		const whole = Buffer.concat(parts);
		for (const declared of [undefined, whole.length, whole.length - 100, whole.length + 100, 0, Number.NaN]) {
			const c = new ByteCollector(declared);
			for (const p of parts) c.push(p);
			const out = await c.finish();
			expect(out.equals(whole), `declared ${declared}`).toBe(true);
			expect(c.length).toBe(whole.length);
		}
	});

	it('joins large bodies over several turns of the event loop, and owns its memory', async () => {
		const parts = pieces(Array(40).fill(1 << 19)); // 20 MB in 512 kB pieces, no size declared
		const c = new ByteCollector();
		for (const p of parts) c.push(p);
		let turns = 0;
		const ticker = setInterval(() => turns++, 0);
		const out = await c.finish();
		clearInterval(ticker);
		expect(out.length).toBe(20 * 1024 * 1024);
		expect(out.subarray(3 << 19, (3 << 19) + 1000).equals(parts[3].subarray(0, 1000))).toBe(true);
		// Its own ArrayBuffer, the size of the body: transferable to a worker without copying others' bytes.
		expect(out.buffer.byteLength).toBe(out.length);
		expect(out.byteOffset).toBe(0);
		// The join yielded at least once (8 MB per turn), so a timer got to run meanwhile.
		expect(turns).toBeGreaterThan(0);
	});
});
