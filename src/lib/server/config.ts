/** Runtime settings from the environment, read once. Everything has an embedded default. */
export interface Config {
	databaseUrl: string;
	/** Real SMTP server; when unset a local fake SMTP server receives all mail. */
	smtpUrl: string | null;
	fakeSmtpPort: number;
	mailFrom: string;
	/** Public base URL used in links inside e-mails. */
	publicUrl: string;
	invitationLifetimeMs: number;
	resetLifetimeMs: number;
	signInLimit: { attempts: number; windowMs: number };
}

function int(name: string, fallback: number): number {
	const raw = process.env[name];
	if (raw === undefined || raw === '') return fallback;
	const value = Number(raw);
	if (!Number.isFinite(value)) throw new Error(`${name} must be a number, got "${raw}"`);
	return value;
}

export function loadConfig(): Config {
	return {
		databaseUrl: process.env.DATABASE_URL || 'data/strainline.sqlite',
		smtpUrl: process.env.SMTP_URL || null,
		fakeSmtpPort: int('FAKE_SMTP_PORT', 2525),
		mailFrom: process.env.MAIL_FROM || 'Strainline <no-reply@strainline.invalid>',
		publicUrl: (process.env.ORIGIN || process.env.PUBLIC_URL || 'http://localhost:3000').replace(/\/$/, ''),
		invitationLifetimeMs: int('INVITATION_LIFETIME_HOURS', 72) * 3600_000,
		resetLifetimeMs: int('RESET_LIFETIME_MINUTES', 60) * 60_000,
		signInLimit: { attempts: int('SIGN_IN_ATTEMPTS', 8), windowMs: int('SIGN_IN_WINDOW_MINUTES', 15) * 60_000 }
	};
}

export const config: Config = loadConfig();
