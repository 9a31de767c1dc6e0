/**
 * The environment the app's own process starts with (`npm start`, the demo, the end-to-end tests'
 * server and the benchmarks' app processes; a deployment sets the same, e.g. `Environment=` in a
 * systemd unit).
 *
 * `GLIBC_TUNABLES=glibc.malloc.hugetlb=1` asks glibc (2.35 and later; Debian 12 has 2.36) to
 * advise transparent huge pages for the memory it maps, which Linux honours when
 * /sys/kernel/mm/transparent_hugepage/enabled is `madvise` or `always`. Large buffers (a
 * 100 MB sky map, a catalogue's index) are then filled in 2 MiB pages instead of 4 KiB ones: on
 * this project's 2-core VM, reading a 101 MB flat map from the page cache into a new buffer took
 * 250–350 ms in 4 KiB pages (one fault each) and 13–19 ms so (tests/bench/skymap.bench.ts
 * measures both in every run). numpy asks for huge pages for its large arrays by itself; Node
 * cannot, so the process is told at start. Elsewhere (musl, macOS, old glibc) the variable is
 * ignored.
 */
export const HUGE_PAGES_TUNABLE = 'glibc.malloc.hugetlb=1';

/** `env` with the app's tunables added (kept beside any the caller already sets). */
export function appProcessEnv(env: NodeJS.ProcessEnv = process.env): NodeJS.ProcessEnv {
	const tunables = (env.GLIBC_TUNABLES ?? '').split(':').filter(Boolean);
	if (!tunables.some((t) => t.startsWith('glibc.malloc.hugetlb='))) tunables.push(HUGE_PAGES_TUNABLE);
	return { ...env, GLIBC_TUNABLES: tunables.join(':') };
}
