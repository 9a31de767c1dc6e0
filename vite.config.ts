import { sveltekit } from '@sveltejs/kit/vite';
import { defineConfig } from 'vitest/config';
import type { Plugin } from 'vite';
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

export default defineConfig({
	plugins: [sveltekit(), liveHub()],
	test: {
		include: ['src/**/*.spec.ts', 'tests/unit/**/*.spec.ts', 'fake-alert-broker/**/*.spec.ts'],
		environment: 'node',
		// Mail in tests goes to a fake SMTP server on a free loopback port.
		env: { FAKE_SMTP_PORT: '0', SMTP_URL: '' },
		testTimeout: 20_000,
		pool: 'forks'
	}
});
