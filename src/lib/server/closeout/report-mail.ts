/**
 * Sending an event's report to the collaboration's mailing list: the Markdown and the PDF as
 * attachments, a few lines of summary in the body. Sent when an event is closed (the
 * `event.closed` action, inside the named service `closeout.report-mail`), and callable directly.
 */
import { sendMail } from '../platform/mail';
import { onRecorded } from '../platform/realtime';
import { restartService } from '../platform/services';
import { eventLink } from '../duty/paging';
import { reportMarkdown, bulletinText } from '../../closeout/markdown.ts';
import { eventReport, recordSky, reportFileName } from './report';
import { reportPdf } from './report-pdf';
import { mailingList } from './mailing-list';

export type ReportMailOutcome = { sent: true; to: string; bytes: { markdown: number; pdf: number } } | { sent: false; reason: 'no-address' };

/** E-mail the event's report to the mailing list; nothing is sent while no address is set. */
export async function sendReportToList(eventId: string, now = new Date()): Promise<ReportMailOutcome> {
	const { address } = mailingList();
	if (!address) return { sent: false, reason: 'no-address' };
	const report = await eventReport(eventId, now);
	const markdown = reportMarkdown(report);
	const pdf = await reportPdf(report, recordSky(eventId));
	const id = report.event.sourceEventId;
	await sendMail({
		to: address,
		subject: `[Strainline] Event record ${id}`,
		text: [
			`The record of ${id} is attached as Markdown and PDF.`,
			'',
			bulletinText(report),
			'',
			`Open it in Strainline: ${eventLink(eventId)}/record`
		].join('\n'),
		attachments: [
			{ filename: reportFileName(id, 'md'), content: markdown, contentType: 'text/markdown; charset=utf-8' },
			{ filename: reportFileName(id, 'pdf'), content: pdf, contentType: 'application/pdf' }
		]
	});
	return { sent: true, to: address, bytes: { markdown: Buffer.byteLength(markdown), pdf: pdf.length } };
}

/** On `event.closed`, send the report to the list (a failure is logged, never thrown into the closing). */
export function installReportMail(): () => void {
	return restartService('closeout.report-mail', () => {
		// Closing is logged to the board and the event's room: send once, on the board's copy.
		const off = onRecorded('event.closed', ({ eventId }, m) => {
			if (m.room !== 'board') return;
			sendReportToList(eventId).catch((e) => console.error(`[closeout] could not send the record of ${eventId} to the mailing list:`, e));
		});
		return { stop: off };
	});
}
