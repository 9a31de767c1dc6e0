import { sveltekit } from '@sveltejs/kit/vite';
import { defineConfig } from 'vitest/config';
import { build, type Plugin } from 'vite';
import { builtinModules } from 'node:module';
import { fileURLToPath } from 'node:url';
import { BUILD_DIR } from './svelte.config.js';
import type { Server as HttpServer } from 'node:http';
import { attachSocketIO } from './src/lib/server/platform/socket-host.js';

/** socket.io on Vite's own HTTP server, so `vite dev` and `vite preview` have the live hub too. */
function liveHub(): Plugin {
	return {
		name: 'strainline-live-hub',
		configureServer(server) {
			if (server.httpServer) attachSocketIO(server.httpServer as HttpServer);
		},
		configurePreviewServer(server) {
			if (server.httpServer) attachSocketIO(server.httpServer as HttpServer);
		}
	};
}

/**
 * The work pool's worker entry for the built app: bundled on its own to `<adapter out>/work-worker.js`
 * once the adapter has written the build (the adapter empties that folder first). Packages stay
 * imports (they are dependencies, installed beside the build), as in the adapter's own bundle.
 */
function workPoolWorker(): Plugin {
	let ssr = false;
	return {
		name: 'strainline-work-pool-worker',
		apply: 'build',
		configResolved(config) {
			ssr = Boolean(config.build.ssr);
		},
		closeBundle: {
			order: 'post',
			sequential: true,
			async handler() {
				if (!ssr) return;
				await build({
					configFile: false,
					logLevel: 'warn',
					build: {
						ssr: fileURLToPath(new URL('./src/lib/server/platform/work-worker.ts', import.meta.url)),
						outDir: BUILD_DIR,
						emptyOutDir: false,
						copyPublicDir: false,
						target: 'node20',
						minify: false,
						rollupOptions: {
							external: [...builtinModules, ...builtinModules.map((m) => `node:${m}`), /^[^./]/],
							output: { format: 'es', entryFileNames: 'work-worker.js', inlineDynamicImports: true }
						}
					}
				});
			}
		}
	};
}

export default defineConfig({
	plugins: [sveltekit(), liveHub(), workPoolWorker()],
	test: {
		include: ['src/**/*.spec.ts', 'tests/unit/**/*.spec.ts', 'fake-alert-broker/**/*.spec.ts'],
		environment: 'node',
		// Mail in tests goes to a fake SMTP server on a free loopback port.
		env: { FAKE_SMTP_PORT: '0', SMTP_URL: '' },
		testTimeout: 20_000,
		pool: 'forks'
	}
});
