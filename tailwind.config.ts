import type { Config } from 'tailwindcss';

/**
 * Strainline design tokens. Semantic colours point at CSS variables set per theme in
 * src/app.css, so one class works in the dark (default, for night shifts) and the light theme.
 */
export default {
	content: ['./src/**/*.{html,svelte,ts}'],
	darkMode: ['selector', '[data-theme="dark"]'],
	theme: {
		extend: {
			colors: {
				// Raw scales
				night: {
					50: '#eef1f8', 100: '#d9dfee', 200: '#b3bedb', 300: '#8595bf', 400: '#5c6c9b',
					500: '#414f7a', 600: '#2f3a5c', 700: '#222a45', 800: '#171d31', 900: '#0f1322', 950: '#080b15'
				},
				chirp: {
					50: '#e8fbf8', 100: '#c6f4ec', 200: '#90e8da', 300: '#55d6c3', 400: '#22bfa9',
					500: '#0ea390', 600: '#0b8374', 700: '#0d685e', 800: '#0f534c', 900: '#10443f'
				},
				ember: {
					50: '#fff3ec', 100: '#ffe2d1', 200: '#ffc2a0', 300: '#ff9a66', 400: '#ff7a45',
					500: '#f2571f', 600: '#cf4114', 700: '#a73415', 800: '#852d18', 900: '#6c2817'
				},
				// Semantic, theme-aware
				surface: 'rgb(var(--sl-surface) / <alpha-value>)',
				raised: 'rgb(var(--sl-raised) / <alpha-value>)',
				sunken: 'rgb(var(--sl-sunken) / <alpha-value>)',
				line: 'rgb(var(--sl-line) / <alpha-value>)',
				ink: 'rgb(var(--sl-ink) / <alpha-value>)',
				muted: 'rgb(var(--sl-muted) / <alpha-value>)',
				accent: 'rgb(var(--sl-accent) / <alpha-value>)',
				'accent-ink': 'rgb(var(--sl-accent-ink) / <alpha-value>)',
				signal: 'rgb(var(--sl-signal) / <alpha-value>)',
				good: 'rgb(var(--sl-good) / <alpha-value>)',
				caution: 'rgb(var(--sl-caution) / <alpha-value>)',
				danger: 'rgb(var(--sl-danger) / <alpha-value>)'
			},
			fontFamily: {
				display: ['"Space Grotesk Variable"', 'ui-sans-serif', 'system-ui', 'sans-serif'],
				sans: ['"Inter Variable"', 'ui-sans-serif', 'system-ui', 'sans-serif'],
				mono: ['"JetBrains Mono Variable"', 'ui-monospace', 'monospace']
			},
			borderRadius: { panel: '0.875rem' },
			boxShadow: { panel: '0 1px 0 0 rgb(var(--sl-line) / 0.6), 0 8px 24px -12px rgb(0 0 0 / 0.35)' }
		}
	}
} satisfies Config;
