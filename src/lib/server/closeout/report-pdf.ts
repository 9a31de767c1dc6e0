/**
 * The event report as a print-ready A4 PDF (pdfkit), drawn from the same report as the page and the
 * Markdown, with the coverage curve and the sky round the credible region drawn as vector paths.
 *
 * Fonts: the app's own families (Space Grotesk, Inter, JetBrains Mono) from their static
 * @fontsource packages in WOFF 1 form, unpacked once (pdf-fonts.ts). pdfkit's font engine (fontkit 2) fails to subset the
 * variable WOFF2 files the pages use ("Offset is outside the bounds of the DataView"), so the PDF
 * uses the static cuts of the same families. Their "latin" files hold Basic Latin, Latin-1 and
 * common punctuation (−, ², ±, –, —, “ ”), which is all the report writes.
 */
import PDFDocument from 'pdfkit';
import type { EventReport } from '../../closeout/report.ts';
import { duration, exposure, num, pct, signedMag, utc } from '../../closeout/format.ts';
import { niceStep, skyProjection, skyWindow, splitAtSeam, stepPoints, type Box } from '../../closeout/charts.ts';
import { footprintPolygon } from '../../targeting/sky-geometry.ts';
import { eventReport, recordSky, reportFileName, type RecordSky } from './report';
import { pdfFonts } from './pdf-fonts';


const INK = '#14202e';
const MUTED = '#5b6878';
const RULE = '#c9d1db';
/** The chirp teal and the ember orange of the app's palette (tailwind.config.ts). */
const TEAL = '#0b8374';
const EMBER = '#cf4114';
const TEAM_COLOURS = ['#0b8374', '#cf4114', '#5a6fd6', '#b0468a', '#6c9a1c', '#a07a1a'];

const MARGIN = 48;
const PAGE = { width: 595.28, height: 841.89 };
const CONTENT_WIDTH = PAGE.width - 2 * MARGIN;

type Doc = InstanceType<typeof PDFDocument>;

/** An event's report as a PDF file: its name and bytes. */
export async function recordPdf(eventId: string, now = new Date()): Promise<{ fileName: string; bytes: Buffer }> {
	const report = await eventReport(eventId, now);
	return { fileName: reportFileName(report.event.sourceEventId, 'pdf'), bytes: await reportPdf(report, recordSky(eventId)) };
}

/** The report as PDF bytes. */
export function reportPdf(report: EventReport, sky: RecordSky): Promise<Buffer> {
	const doc = new PDFDocument({
		size: 'A4',
		margins: { top: MARGIN, bottom: MARGIN, left: MARGIN, right: MARGIN },
		info: { Title: `Event record ${report.event.sourceEventId}`, Creator: 'Strainline', CreationDate: new Date(report.generatedAt) },
		bufferPages: true
	});
	for (const [name, bytes] of Object.entries(pdfFonts())) doc.registerFont(name, bytes);
	const chunks: Buffer[] = [];
	doc.on('data', (c: Buffer) => chunks.push(c));
	const done = new Promise<Buffer>((resolve, reject) => {
		doc.on('end', () => resolve(Buffer.concat(chunks)));
		doc.on('error', reject);
	});
	write(doc, report, sky);
	// Page numbers last, when the count is known.
	const range = doc.bufferedPageRange();
	for (let i = range.start; i < range.start + range.count; i++) {
		doc.switchToPage(i);
		// Below the bottom margin: lift the margin, or pdfkit starts a new page for the footer.
		doc.page.margins.bottom = 0;
		doc.font('body').fontSize(8).fillColor(MUTED);
		doc.text(`${report.event.sourceEventId} · event record · page ${i + 1} of ${range.count}`, MARGIN, PAGE.height - MARGIN + 16, { width: CONTENT_WIDTH, align: 'center', lineBreak: false });
	}
	doc.end();
	return done;
}

function write(doc: Doc, r: EventReport, sky: RecordSky): void {
	const e = r.event;
	doc.font('heading').fontSize(20).fillColor(INK).text(`Event record: ${e.sourceEventId}`);
	doc.font('body').fontSize(9).fillColor(MUTED).text(`Generated ${utc(r.generatedAt)} from the stored rows · state ${e.state}${e.closedAt ? ` · closed ${utc(e.closedAt)}` : ''}`);
	doc.moveDown(0.6);

	if (r.annotation) {
		heading(doc, 'Coordinator’s note');
		doc.font('body').fontSize(10).fillColor(INK).text(r.annotation.text, { width: CONTENT_WIDTH });
		doc.font('body').fontSize(8).fillColor(MUTED).text(`${r.annotation.updatedBy ?? 'unknown'}, ${utc(r.annotation.updatedAt)}`);
		doc.moveDown(0.4);
	}

	heading(doc, 'Times');
	table(doc, ['Moment', 'Time', 'After merger'], [
		['Merger', utc(r.times.merger), '—'],
		['First notice received', utc(r.times.firstNoticeReceived), duration(r.delaysS.firstNoticeReceived)],
		['Acknowledged by duty', utc(r.times.acknowledged), duration(r.delaysS.acknowledged)],
		['First observation', utc(r.times.firstObservation), duration(r.delaysS.firstObservation)]
	], [0.4, 0.4, 0.2]);

	heading(doc, 'Final sky map and coverage');
	const facts: [string, string][] = [
		['50% / 90% credible area', `${num(e.area50Deg2)} / ${num(e.area90Deg2)} deg²`],
		['Distance', e.distanceMeanMpc === null ? '—' : `${num(e.distanceMeanMpc, 0)} ± ${num(e.distanceStdMpc, 0)} Mpc`],
		['Sky probability covered (union)', pct(r.coverage.sky)],
		['Sum of footprints (overlaps again)', pct(r.coverage.sumOfFootprints)],
		['Ranked galaxy probability observed', pct(r.coverage.galaxies)],
		['Notices · pointings · candidates · classifications', `${r.counts.notices} · ${r.counts.observations} · ${r.counts.candidates} · ${r.counts.classifications}`]
	];
	for (const [k, v] of facts) {
		const y = doc.y;
		doc.font('body').fontSize(9.5).fillColor(MUTED).text(k, MARGIN, y, { width: CONTENT_WIDTH * 0.55 });
		doc.font('mono').fontSize(9.5).fillColor(INK).text(v, MARGIN + CONTENT_WIDTH * 0.55, y, { width: CONTENT_WIDTH * 0.45 });
		doc.x = MARGIN;
	}
	doc.moveDown(0.6);

	// The two drawings side by side.
	ensureSpace(doc, 230);
	const top = doc.y;
	const half = (CONTENT_WIDTH - 16) / 2;
	drawCurve(doc, r, { x: MARGIN, y: top, width: half, height: 200 });
	drawSky(doc, sky, { x: MARGIN + half + 16, y: top, width: half, height: 200 });
	doc.x = MARGIN;
	doc.y = top + 214;

	heading(doc, 'Coverage by team');
	table(doc, ['Team', 'Pointings', 'Sky', 'Galaxies'], r.coverage.byTeam.map((t) => [t.team, String(t.observations), pct(t.sky), pct(t.galaxies)]), [0.5, 0.16, 0.17, 0.17]);
	heading(doc, 'Coverage by filter');
	table(doc, ['Filter', 'Pointings', 'Sky', 'Galaxies'], r.coverage.byFilter.map((f) => [f.filter, String(f.observations), pct(f.sky), pct(f.galaxies)]), [0.5, 0.16, 0.17, 0.17]);

	heading(doc, 'Telescopes and depth');
	if (r.kilonova) {
		para(
			doc,
			`An ${r.kilonova.model} at ${num(r.kilonova.distanceMpc, 0)} Mpc would peak near m = ${num(r.kilonova.expectedMag)}` +
				(r.kilonova.expectedMagFar !== null ? ` (${num(r.kilonova.expectedMagFar)} at ${num(r.kilonova.farDistanceMpc, 0)} Mpc)` : '') +
				`. Model: ${r.kilonova.source} Margin = median limiting magnitude − expected magnitude; positive means deep enough.`
		);
	} else para(doc, 'No distance estimate: the depth is not compared with a kilonova.');
	table(
		doc,
		['Telescope', 'Team', 'Filter', 'Pointings', 'Exposure', 'Median lim.', 'Deepest', 'Margin'],
		r.telescopes.flatMap((t) => t.filters.map((f) => [t.telescope, t.team, f.filter, String(f.observations), exposure(f.exposureS), num(f.medianLimitingMag), num(f.deepestLimitingMag), signedMag(f.marginMag)])),
		[0.2, 0.18, 0.07, 0.1, 0.11, 0.12, 0.11, 0.11]
	);

	heading(doc, 'Candidates');
	if (!r.candidates.length) para(doc, 'No candidate was reported.');
	for (const k of r.candidates) {
		ensureSpace(doc, 60);
		doc.font('bold').fontSize(10).fillColor(INK).text(`${k.name}  `, { continued: true });
		doc.font('body').fontSize(9).fillColor(MUTED).text(`RA ${k.raDeg.toFixed(4)}, Dec ${k.decDeg >= 0 ? '+' : '−'}${Math.abs(k.decDeg).toFixed(4)} · ${k.team} · ${k.state}`);
		const rates = k.photometry.filters.filter((f) => f.rateMagPerDay !== null).map((f) => `${f.filter} ${f.rateMagPerDay! >= 0 ? '+' : '−'}${Math.abs(f.rateMagPerDay!).toFixed(2)} mag/d`);
		para(
			doc,
			`Discovered ${utc(k.discoveredAt)} at ${num(k.discoveryMag, 2)} (${k.discoveryFilter}). Vetting: ${k.vetting.verdict ?? 'not vetted'}` +
				`, credible level ${pct(k.vetting.credibleLevel)}` +
				(k.vetting.host ? `, host ${k.vetting.host}` : '') +
				(k.vetting.absoluteMag !== null ? `, absolute magnitude ${num(k.vetting.absoluteMag)}` : '') +
				`. Photometry: ${k.photometry.detections} detections, ${k.photometry.upperLimits} upper limits${rates.length ? ` (${rates.join(', ')})` : ''}. Classification: ${k.classification.text.replace(/\.$/, '')}.`
		);
	}

	heading(doc, 'Notices received');
	table(doc, ['Kind', 'Role', 'Issued', 'Received'], r.notices.map((n) => [n.kind, n.role, utc(n.authoredAt), utc(n.receivedAt)]), [0.2, 0.2, 0.3, 0.3]);

	heading(doc, 'Participants');
	table(doc, ['Team', 'Did'], r.participants.teams.map((t) => [t.name, t.deeds.join(', ')]), [0.35, 0.65]);
	table(doc, ['Person', 'Did'], r.participants.people.map((p) => [p.name, p.deeds.join(', ')]), [0.35, 0.65]);
}

function ensureSpace(doc: Doc, height: number): void {
	if (doc.y + height > PAGE.height - MARGIN) doc.addPage();
}

function heading(doc: Doc, text: string): void {
	ensureSpace(doc, 50);
	doc.moveDown(0.5);
	doc.x = MARGIN;
	doc.font('heading').fontSize(12.5).fillColor(INK).text(text);
	const y = doc.y + 1;
	doc.moveTo(MARGIN, y).lineTo(MARGIN + CONTENT_WIDTH, y).lineWidth(0.5).strokeColor(RULE).stroke();
	doc.y = y + 4;
}

function para(doc: Doc, text: string): void {
	doc.x = MARGIN;
	doc.font('body').fontSize(9).fillColor(INK).text(text, { width: CONTENT_WIDTH });
	doc.moveDown(0.3);
}

/** A plain table; rows that would cross the bottom margin go to the next page under a repeated head. */
function table(doc: Doc, head: string[], rows: string[][], widths: number[]): void {
	const cols = widths.map((w) => w * CONTENT_WIDTH);
	const rowHeight = (cells: string[], font: string) => {
		doc.font(font).fontSize(8.5);
		return Math.max(...cells.map((c, i) => doc.heightOfString(c, { width: cols[i] - 6 }))) + 5;
	};
	const drawRow = (cells: string[], font: string, colour: string) => {
		const h = rowHeight(cells, font);
		if (doc.y + h > PAGE.height - MARGIN) {
			doc.addPage();
			if (cells !== head) drawRow(head, 'bold', MUTED);
		}
		const y = doc.y;
		let x = MARGIN;
		doc.font(font).fontSize(8.5).fillColor(colour);
		cells.forEach((c, i) => {
			doc.text(c, x + 3, y + 2.5, { width: cols[i] - 6 });
			x += cols[i];
		});
		doc.moveTo(MARGIN, y + h).lineTo(MARGIN + CONTENT_WIDTH, y + h).lineWidth(0.4).strokeColor(RULE).stroke();
		doc.x = MARGIN;
		doc.y = y + h;
	};
	if (!rows.length) {
		para(doc, '(none)');
		return;
	}
	drawRow(head, 'bold', MUTED);
	for (const row of rows) drawRow(row, 'body', INK);
	doc.moveDown(0.4);
}

function frameLabel(doc: Doc, box: Box, title: string): Box {
	doc.font('bold').fontSize(9).fillColor(INK).text(title, box.x, box.y, { width: box.width, lineBreak: false });
	return { x: box.x + 30, y: box.y + 16, width: box.width - 36, height: box.height - 40 };
}

/** Sky and galaxy coverage against hours since the merger, as steps. */
function drawCurve(doc: Doc, r: EventReport, box: Box): void {
	const plot = frameLabel(doc, box, 'Coverage against time since merger');
	// The last level runs on past the last pointing, so that it reads as a level and not an edge.
	const lastHours = Math.max(0, ...r.coverage.curve.map((p) => p.hoursSinceMerger ?? 0));
	const tEnd = lastHours * 1.25 || 1;
	const sky = stepPoints(r.coverage.curve.map((p) => ({ hoursSinceMerger: p.hoursSinceMerger, value: p.sky })), tEnd);
	const gal = stepPoints(r.coverage.curve.map((p) => ({ hoursSinceMerger: p.hoursSinceMerger, value: p.galaxies })), tEnd);
	doc.rect(plot.x, plot.y, plot.width, plot.height).lineWidth(0.5).strokeColor(RULE).stroke();
	if (!sky.length && !gal.length) {
		doc.font('body').fontSize(8.5).fillColor(MUTED).text(r.times.merger ? 'No pointings reported.' : 'No merger time: no curve.', plot.x + 8, plot.y + plot.height / 2 - 5, { width: plot.width - 16, align: 'center' });
		return;
	}
	const tMax = tEnd;
	const yMax = Math.min(1, Math.max(0.05, ...[...sky, ...gal].map(([, v]) => v)) * 1.1);
	const x = (t: number) => plot.x + (Math.max(0, t) / tMax) * plot.width;
	const y = (v: number) => plot.y + plot.height - (v / yMax) * plot.height;
	doc.font('mono').fontSize(7).fillColor(MUTED);
	const tStep = niceStep(tMax);
	for (let t = 0; t <= tMax + 1e-9; t += tStep) {
		doc.moveTo(x(t), plot.y + plot.height).lineTo(x(t), plot.y + plot.height + 3).strokeColor(MUTED).stroke();
		doc.text(`${+t.toFixed(2)}`, x(t) - 15, plot.y + plot.height + 4, { width: 30, align: 'center', lineBreak: false });
	}
	const vStep = niceStep(yMax);
	for (let v = 0; v <= yMax + 1e-9; v += vStep) {
		doc.moveTo(plot.x, y(v)).lineTo(plot.x + plot.width, y(v)).lineWidth(0.3).strokeColor(RULE).stroke();
		doc.text(`${Math.round(v * 100)}%`, plot.x - 30, y(v) - 3.5, { width: 27, align: 'right', lineBreak: false });
	}
	doc.text('hours since merger', plot.x, plot.y + plot.height + 13, { width: plot.width, align: 'center', lineBreak: false });
	const line = (pts: [number, number][], colour: string, dash: boolean) => {
		if (pts.length < 2) return;
		doc.moveTo(x(pts[0][0]), y(pts[0][1]));
		for (const [t, v] of pts.slice(1)) doc.lineTo(x(t), y(v));
		doc.lineWidth(1.4).strokeColor(colour);
		if (dash) doc.dash(3, { space: 2 });
		doc.stroke();
		doc.undash();
	};
	line(sky, TEAL, false);
	line(gal, EMBER, true);
	legend(doc, plot.x + 6, plot.y + 6, [
		[TEAL, 'sky probability (union)'],
		[EMBER, 'ranked galaxy probability']
	]);
}

function legend(doc: Doc, x: number, y: number, items: [string, string][]): void {
	doc.font('body').fontSize(7);
	items.forEach(([colour, label], i) => {
		doc.rect(x, y + i * 10 + 2, 8, 3).fillColor(colour).fill();
		doc.fillColor(INK).text(label, x + 11, y + i * 10, { lineBreak: false });
	});
}

/** The credible contours, footprints and candidates on an equirectangular patch of sky. */
function drawSky(doc: Doc, sky: RecordSky, box: Box): void {
	const plot = frameLabel(doc, box, 'Credible region and footprints');
	const c90 = sky.contours.find((c) => Math.abs(c.level - 0.9) < 1e-6) ?? sky.contours.at(-1);
	const points: [number, number][] = [
		...(c90?.lines.flat() ?? []),
		...sky.footprints.map((f) => [f.raDeg, f.decDeg] as [number, number]),
		...sky.candidates.map((c) => [c.raDeg, c.decDeg] as [number, number])
	];
	const window = skyWindow(points);
	doc.rect(plot.x, plot.y, plot.width, plot.height).lineWidth(0.5).strokeColor(RULE).stroke();
	if (!window) {
		doc.font('body').fontSize(8.5).fillColor(MUTED).text('No sky map or pointings to draw.', plot.x + 8, plot.y + plot.height / 2 - 5, { width: plot.width - 16, align: 'center' });
		return;
	}
	const proj = skyProjection(window, plot);
	const f = proj.frame;
	doc.save();
	doc.rect(f.x, f.y, f.width, f.height).clip();
	// Grid.
	doc.font('mono').fontSize(6.5).fillColor(MUTED);
	const decStep = niceStep(window.decMaxDeg - window.decMinDeg);
	for (let d = Math.ceil(window.decMinDeg / decStep) * decStep; d <= window.decMaxDeg; d += decStep) {
		const [, yy] = proj.project(window.raCentreDeg, d);
		doc.moveTo(f.x, yy).lineTo(f.x + f.width, yy).lineWidth(0.3).strokeColor(RULE).stroke();
		doc.text(`${d > 0 ? '+' : d < 0 ? '−' : ''}${Math.abs(+d.toFixed(1))}°`, f.x + 2, yy + 1, { lineBreak: false });
	}
	const raStep = niceStep(2 * window.raHalfSpanDeg, 3);
	const raFrom = window.raCentreDeg - window.raHalfSpanDeg;
	for (let a = Math.ceil(raFrom / raStep) * raStep; a <= window.raCentreDeg + window.raHalfSpanDeg; a += raStep) {
		const [xx] = proj.project(a, window.decMinDeg);
		doc.moveTo(xx, f.y).lineTo(xx, f.y + f.height).lineWidth(0.3).strokeColor(RULE).stroke();
		doc.text(`${+(((a % 360) + 360) % 360).toFixed(1)}°`, xx + 1, f.y + f.height - 8, { lineBreak: false });
	}
	const path = (pts: [number, number][], close: boolean) => {
		const [x0, y0] = proj.project(pts[0][0], pts[0][1]);
		doc.moveTo(x0, y0);
		for (const [ra, dec] of pts.slice(1)) doc.lineTo(...proj.project(ra, dec));
		if (close) doc.closePath();
	};
	// Footprints, filled lightly per team, then the contours over them.
	const teams = [...new Set(sky.footprints.map((fp) => fp.team))];
	for (const fp of sky.footprints) {
		const colour = TEAM_COLOURS[teams.indexOf(fp.team) % TEAM_COLOURS.length];
		for (const piece of splitAtSeam(footprintPolygon(fp), window)) {
			path(piece, true);
			doc.lineWidth(0.6).fillOpacity(0.18).fillAndStroke(colour, colour);
			doc.fillOpacity(1);
		}
	}
	for (const c of sky.contours) {
		for (const line of c.lines) {
			for (const piece of splitAtSeam(line, window)) {
				path(piece, false);
				doc.lineWidth(c.level < 0.7 ? 1.2 : 0.8).strokeColor(INK);
				if (c.level >= 0.7) doc.dash(2.5, { space: 1.5 });
				doc.stroke();
				doc.undash();
			}
		}
	}
	for (const k of sky.candidates) {
		const [cx, cy] = proj.project(k.raDeg, k.decDeg);
		doc.circle(cx, cy, 2.2).lineWidth(0.8).strokeColor(EMBER).stroke();
	}
	doc.restore();
	doc.font('body').fontSize(6.5).fillColor(MUTED).text('Solid: 50% contour · dashed: 90% · circles: candidates · RA grows to the left', f.x, f.y + f.height + 4, { width: f.width, lineBreak: false });
	legend(
		doc,
		f.x + f.width - 70,
		f.y + 4,
		teams.slice(0, 6).map((t, i) => [TEAM_COLOURS[i % TEAM_COLOURS.length], t])
	);
}
