import nodemailer, { type Transporter } from 'nodemailer';
import { config } from './config';
import { join } from 'node:path';
import { startFakeSmtp, fakeSmtpPort } from './fake-smtp';

export interface MailAttachment {
	filename: string;
	content: Buffer | string;
	contentType: string;
}

export interface OutgoingMail {
	to: string;
	subject: string;
	text: string;
	/** Extra headers (List-Unsubscribe, List-Unsubscribe-Post). */
	headers?: Record<string, string>;
	attachments?: MailAttachment[];
}

let transporter: Transporter | null = null;

/** True when mail goes to the local catcher; the mailbox page exists only then. */
export function usesFakeSmtp(): boolean {
	return !config.smtpUrl;
}

/** Prepare the transport; starts the local catcher when no SMTP_URL is configured. */
export async function startMail(): Promise<void> {
	if (transporter) return;
	if (config.smtpUrl) {
		transporter = nodemailer.createTransport(config.smtpUrl);
		return;
	}
	const port = await startFakeSmtp(config.fakeSmtpPort, join(config.alerts.storageDir, 'mail'));
	transporter = nodemailer.createTransport({ host: '127.0.0.1', port, secure: false, ignoreTLS: true });
}

export async function sendMail(mail: OutgoingMail): Promise<void> {
	if (!transporter) await startMail();
	await transporter!.sendMail({ from: config.mailFrom, to: mail.to, subject: mail.subject, text: mail.text, headers: mail.headers, attachments: mail.attachments });
}

export { fakeSmtpPort };
