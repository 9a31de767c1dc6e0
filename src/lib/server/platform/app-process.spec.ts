import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { appProcessEnv } from './app-process';

describe("the app process's environment", () => {
	it('adds the huge-pages tunable, keeps other tunables and an explicit choice', () => {
		expect(appProcessEnv({ PATH: '/bin' })).toEqual({ PATH: '/bin', GLIBC_TUNABLES: 'glibc.malloc.hugetlb=1' });
		expect(appProcessEnv({ GLIBC_TUNABLES: 'glibc.malloc.arena_max=2' }).GLIBC_TUNABLES).toBe('glibc.malloc.arena_max=2:glibc.malloc.hugetlb=1');
		expect(appProcessEnv({ GLIBC_TUNABLES: 'glibc.malloc.hugetlb=0' }).GLIBC_TUNABLES).toBe('glibc.malloc.hugetlb=0');
	});

	it('gives a node process huge pages for a large buffer where the kernel offers them (and none without it)', () => {
		let thp = '';
		try {
			thp = readFileSync('/sys/kernel/mm/transparent_hugepage/enabled', 'utf8');
		} catch {
			/* not Linux, or no transparent huge pages */
		}
		const offered = /\[(madvise|always)\]/.test(thp);
		const script = 'const b = Buffer.alloc(64 * 1024 * 1024, 1); const m = /AnonHugePages:\\s+(\\d+)/.exec(require("fs").readFileSync("/proc/self/smaps_rollup", "utf8")); process.stdout.write(String(m ? Number(m[1]) : -1) + " " + b[12345]);';
		const hugeKb = (env: NodeJS.ProcessEnv) => Number(execFileSync(process.execPath, ['-e', script], { env }).toString().split(' ')[0]);
		if (!offered || /\[always\]/.test(thp)) {
			// Nothing to tell apart here (no huge pages at all, or every process gets them): the variable is still passed.
			expect(appProcessEnv({}).GLIBC_TUNABLES).toBe('glibc.malloc.hugetlb=1');
			return;
		}
		expect(hugeKb({ PATH: process.env.PATH })).toBe(0);
		// 64 MiB filled: most of it in 2 MiB pages.
		expect(hugeKb(appProcessEnv({ PATH: process.env.PATH }))).toBeGreaterThanOrEqual(32 * 1024);
	});
});
