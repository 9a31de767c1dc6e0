import { afterEach, describe, expect, it, vi } from 'vitest';
import { restartService, runningService, service, stopService } from './services';

const stopped: string[] = [];
const instance = (label: string) => ({ label, stop: () => void stopped.push(label) });

afterEach(() => {
	stopService('test-a');
	stopped.length = 0;
});

describe('named services', () => {
	it('starts a service once and hands the running one to every later caller', () => {
		const first = service('test-a', () => instance('one'));
		expect(service('test-a', () => instance('two'))).toBe(first);
		expect(runningService('test-a')).toBe(first);
		expect(stopped).toEqual([]);
	});

	it('is found again by a fresh copy of the module, as after a hot reload', async () => {
		const first = service('test-a', () => instance('one'));
		vi.resetModules();
		const reloaded = await import('./services');
		expect(reloaded.service('test-a', () => instance('two'))).toBe(first);
	});

	it('replaces the running instance on restart; the old stop function then leaves the new one alone', () => {
		const stopOne = restartService('test-a', () => instance('one'));
		const stopTwo = restartService('test-a', () => instance('two'));
		expect(stopped).toEqual(['one']);
		stopOne();
		expect(stopped).toEqual(['one']);
		expect(runningService<ReturnType<typeof instance>>('test-a')?.label).toBe('two');
		stopTwo();
		expect(stopped).toEqual(['one', 'two']);
		expect(runningService('test-a')).toBeNull();
	});
});
