/**
 * Seeded pseudo-random numbers so that a scenario plays the same way for the same seed.
 * mulberry32 (a public-domain 32-bit generator by Tommy Ettinger; from memory): fast and good
 * enough for jittering demo data, not for statistics.
 */
export function mulberry32(seed: number): () => number {
	let a = seed >>> 0;
	return () => {
		a = (a + 0x6d2b79f5) >>> 0;
		let t = a;
		t = Math.imul(t ^ (t >>> 15), t | 1);
		t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
		return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
	};
}

/** Standard normal deviate by the Box–Muller transform. */
export function gaussian(random: () => number): number {
	const u = 1 - random();
	const v = random();
	return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * v);
}

/** Mix a string into a seed (FNV-1a, 32-bit) so each step of a scenario gets its own stream. */
export function seedFor(seed: number, label: string): number {
	let h = (0x811c9dc5 ^ seed) >>> 0;
	for (let i = 0; i < label.length; i++) {
		h ^= label.charCodeAt(i);
		h = Math.imul(h, 0x01000193) >>> 0;
	}
	return h;
}
