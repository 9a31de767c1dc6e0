import adapter from '@sveltejs/adapter-node';
import { vitePreprocess } from '@sveltejs/vite-plugin-svelte';

/** Where adapter-node writes the built app (vite.config.ts adds the work pool's worker there). */
export const BUILD_DIR = 'build';

/** @type {import('@sveltejs/kit').Config} */
const config = {
	preprocess: vitePreprocess(),
	compilerOptions: { runes: true },
	kit: {
		adapter: adapter({ out: BUILD_DIR }),
		alias: { $cli: 'src/cli' },
		// Scripts only from our own origin, plus SvelteKit's inline start-up script and the theme
		// script in app.html by nonce ('auto': nonces for rendered pages, hashes for prerendered ones).
		// Styles allow 'unsafe-inline' because Svelte, leaflet and uPlot set style attributes; a style
		// cannot run code. Nothing is loaded from other hosts; the live hub's WebSocket is same-origin.
		csp: {
			mode: 'auto',
			directives: {
				'default-src': ['self'],
				'script-src': ['self'],
				'style-src': ['self', 'unsafe-inline'],
				'img-src': ['self', 'data:', 'blob:'],
				'font-src': ['self', 'data:'],
				'connect-src': ['self'],
				'worker-src': ['self', 'blob:'],
				'object-src': ['none'],
				'base-uri': ['self'],
				'form-action': ['self'],
				'frame-ancestors': ['none']
			}
		}
	}
};

export default config;
