import { defineConfig } from 'drizzle-kit';

export default defineConfig({
	schema: './src/lib/server/platform/db/schema.ts',
	out: './drizzle',
	dialect: 'sqlite',
	dbCredentials: { url: process.env.DATABASE_URL ?? 'data/strainline.sqlite' },
	strict: true,
	verbose: true
});
