import { beforeEach, describe, expect, it } from 'vitest';
import { createTestDatabase } from './testing/database';
import { versionedCache } from './versioned-cache';

beforeEach(() => {
	createTestDatabase();
});

describe('a cache kept per version', () => {
	it('builds once per version, shares one build between callers that arrive together, and expires', async () => {
		let clock = 0;
		let builds = 0;
		const cache = versionedCache<number>({ max: 2, ttlMs: 1000, now: () => clock });
		const build = async () => ++builds;
		const [a, b] = await Promise.all([cache.get('k', 'v1', build), cache.get('k', 'v1', build)]);
		expect([a, b, builds]).toEqual([1, 1, 1]);
		expect(await cache.get('k', 'v1', build)).toBe(1);
		// A new version is a new build; so is the same version after the time limit.
		expect(await cache.get('k', 'v2', build)).toBe(2);
		clock = 999;
		expect(await cache.get('k', 'v2', build)).toBe(2);
		clock = 1000;
		expect(await cache.get('k', 'v2', build)).toBe(3);
		// At most `max` keys: the oldest goes first.
		await cache.get('x', 'v', build);
		await cache.get('y', 'v', build);
		expect(cache.size()).toBe(2);
		expect(await cache.get('k', 'v2', build)).toBe(6);
	});

	it('does not keep a failed build', async () => {
		const cache = versionedCache<string>({ max: 4, ttlMs: 60_000 });
		await expect(cache.get('k', 'v', () => Promise.reject(new Error('the map file is missing')))).rejects.toThrow('the map file is missing');
		expect(await cache.get('k', 'v', () => 'built')).toBe('built');
	});

	it('keeps entries apart per database connection', async () => {
		const cache = versionedCache<string>({ max: 4, ttlMs: 60_000 });
		expect(await cache.get('k', 'v', () => 'first database')).toBe('first database');
		createTestDatabase();
		expect(await cache.get('k', 'v', () => 'second database')).toBe('second database');
	});
});
