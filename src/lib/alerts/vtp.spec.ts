import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import {
	buildAck,
	buildIamalive,
	buildNak,
	encodeFrame,
	FrameDecoder,
	FrameError,
	messageKind,
	parseTransport,
	rootElementName,
	TRANSPORT_NS
} from './vtp.ts';

const dir = fileURLToPath(new URL('../../../tests/fixtures/notices/', import.meta.url));
const notice = readFileSync(dir + 'bns-preliminary.xml', 'utf8');

describe('framing', () => {
	it('prefixes the payload with its byte length, big-endian', () => {
		const f = encodeFrame('é<a/>'); // "é" is two bytes in UTF-8: 2 + 4 = 6
		expect([...f.subarray(0, 4)]).toEqual([0, 0, 0, 6]);
		expect(f.subarray(4).toString('utf8')).toBe('é<a/>');
		const big = encodeFrame(Buffer.alloc(0x010203));
		expect([...big.subarray(0, 4)]).toEqual([0, 1, 2, 3]);
	});

	it('decodes a stream of three messages split at every byte boundary', () => {
		const messages = [notice, buildIamalive('ivo://strainline.example/fake-broker'), 'x'];
		const stream = Buffer.concat(messages.map((m) => encodeFrame(m)));
		for (let cut = 0; cut <= stream.length; cut++) {
			const d = new FrameDecoder();
			const out = [...d.push(stream.subarray(0, cut)), ...d.push(stream.subarray(cut))];
			expect(out.map((b) => b.toString('utf8'))).toEqual(messages);
			expect(d.pendingBytes).toBe(0);
		}
	});

	it('decodes a stream fed one byte at a time, and messages joined in one read', () => {
		const messages = ['<a/>', '', '<b>é</b>', notice];
		const stream = Buffer.concat(messages.map((m) => encodeFrame(m)));
		const d = new FrameDecoder();
		const out: string[] = [];
		for (const byte of stream) out.push(...d.push(Uint8Array.of(byte)).map((b) => b.toString('utf8')));
		expect(out).toEqual(messages);
		expect(new FrameDecoder().push(stream).map((b) => b.toString('utf8'))).toEqual(messages);
	});

	it('holds an incomplete frame until the rest arrives', () => {
		const d = new FrameDecoder();
		const f = encodeFrame('<hello/>');
		expect(d.push(f.subarray(0, 6))).toEqual([]);
		expect(d.pendingBytes).toBe(6);
		expect(d.push(f.subarray(6)).map(String)).toEqual(['<hello/>']);
	});

	it('refuses an oversize frame from its header alone, then refuses further input', () => {
		const d = new FrameDecoder({ maxFrameBytes: 1000 });
		const header = Buffer.alloc(4);
		header.writeUInt32BE(1001, 0);
		expect(() => d.push(header)).toThrow(FrameError);
		expect(() => d.push(encodeFrame('<a/>'))).toThrow(/exceeds the 1000-byte limit/);
		// A frame of exactly the limit is fine.
		const ok = new FrameDecoder({ maxFrameBytes: 4 });
		expect(ok.push(encodeFrame('<a/>')).map(String)).toEqual(['<a/>']);
	});

	it('refuses a 4 GiB length claim with the default limit', () => {
		const d = new FrameDecoder();
		expect(() => d.push(Buffer.from([0xff, 0xff, 0xff, 0xff, 0x3c]))).toThrow(/4294967295 bytes/);
	});
});

describe('Transport messages', () => {
	const broker = 'ivo://strainline.example/fake-broker';
	const me = 'ivo://strainline.example/listener';
	const ts = '2030-04-12T07:31:10.000Z';

	it('builds and parses iamalive, ack and nak', () => {
		const alive = buildIamalive(broker, me, ts);
		expect(alive).toContain(`xmlns:trn="${TRANSPORT_NS}"`);
		expect(alive).toContain('role="iamalive"');
		expect(parseTransport(alive)).toEqual({ role: 'iamalive', origin: broker, response: me, timestamp: ts, result: null });

		const eventIvorn = 'ivo://strainline.example/fake-broker#SX30041207-1-preliminary';
		expect(parseTransport(buildAck(eventIvorn, me, ts))).toEqual({
			role: 'ack',
			origin: eventIvorn,
			response: me,
			timestamp: ts,
			result: null
		});
		const nak = parseTransport(buildNak(eventIvorn, me, 'disk <full> & sad', ts));
		expect(nak.role).toBe('nak');
		expect(nak.result).toBe('disk <full> & sad');
	});

	it('parses a Transport message with another prefix and no Response', () => {
		const xml = `<?xml version='1.0'?><x:Transport xmlns:x="${TRANSPORT_NS}" role="iamalive" version="1.0"><Origin>${broker}</Origin><TimeStamp>${ts}</TimeStamp></x:Transport>`;
		expect(parseTransport(xml)).toMatchObject({ role: 'iamalive', origin: broker, response: null });
	});

	it('refuses unknown roles, other roots, malformed XML and DOCTYPE', () => {
		expect(() => parseTransport(`<Transport role="hello"/>`)).toThrow(/unknown Transport role "hello"/);
		expect(() => parseTransport(notice)).toThrow(/not Transport/);
		expect(() => parseTransport(`<Transport role="ack">`)).toThrow(/malformed/);
		expect(() => parseTransport(`<!DOCTYPE x><Transport role="ack"/>`)).toThrow(/DOCTYPE/);
	});

	it('tells a VOEvent from a Transport message by the root element', () => {
		expect(rootElementName(notice)).toBe('VOEvent');
		expect(messageKind(notice)).toBe('voevent');
		expect(messageKind(buildAck('ivo://a/b#c', me))).toBe('transport');
		expect(messageKind('<?xml version="1.0"?><!-- <VOEvent> --><Other/>')).toBe('unknown');
		expect(messageKind('garbage')).toBe('unknown');
	});
});
