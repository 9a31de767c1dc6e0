/**
 * The fake alert broker for the browser tests, started beside the app by server.ts. It plays
 * nothing by itself: a test publishes scenario steps one at a time through a small control
 * server, so each step can be checked on the page before the next arrives.
 *
 *   POST /scenarios/{name}/steps/{index}   publish one step (waits for the app's ack)
 *   GET  /health                           { subscribers }
 */
import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { startBroker, type FakeBroker } from '../../../fake-alert-broker/broker.ts';
import { loadScenario, renderScenario, type RenderedStep } from '../../../fake-alert-broker/scenarios.ts';

// Beside the app's e2e port, so runs on other ports (E2E_PORT) do not collide.
export const BROKER_CONTROL_PORT = Number(process.env.E2E_PORT ?? 4173) + 6;
export const BROKER_CONTROL_URL = `http://127.0.0.1:${BROKER_CONTROL_PORT}`;
/**
 * Scenario delays are divided by this when rendering, so the authored times of a scenario's
 * notices lie within a second of each other and never in the future when a test publishes them.
 */
const SPEED = 100;

export interface E2eBroker {
	broker: FakeBroker;
	/** Environment for the app: where the broker and its archive are. */
	env: { VTP_BROKER: string; VTP_ARCHIVE_URL: string };
	stop: () => Promise<void>;
}

export async function startE2eBroker(log: (m: string) => void = () => undefined): Promise<E2eBroker> {
	const broker = await startBroker({ host: '127.0.0.1', vtpPort: 0, httpPort: 0, iamaliveIntervalMs: 30_000, log });
	const rendered = new Map<string, RenderedStep[]>();
	const control = http.createServer((req, res) => {
		const json = (status: number, body: unknown) => {
			res.writeHead(status, { 'content-type': 'application/json' });
			res.end(JSON.stringify(body));
		};
		const url = new URL(req.url ?? '/', 'http://control.invalid');
		if (req.method === 'GET' && url.pathname === '/health') return json(200, { subscribers: broker.subscriberCount() });
		const m = /^\/scenarios\/([a-z0-9-]+)\/steps\/(\d+)$/.exec(url.pathname);
		if (req.method !== 'POST' || !m) return json(404, { error: { code: 'not_found', message: 'no such control' } });
		let steps = rendered.get(m[1]);
		try {
			steps ??= renderScenario(loadScenario(m[1]), { epoch: new Date(), httpBase: broker.httpBase, seed: 1, speed: SPEED });
		} catch (e) {
			return json(404, { error: { code: 'scenario', message: (e as Error).message } });
		}
		rendered.set(m[1], steps);
		const step = steps[Number(m[2])];
		if (!step) return json(404, { error: { code: 'step', message: `scenario ${m[1]} has ${steps.length} steps` } });
		if (step.map) broker.addFile(step.map.name, step.map.build());
		broker.publish(step.xml).then(
			(result) => json(200, { ...result, sourceEventId: step.sourceEventId, kind: step.kind }),
			(e: Error) => json(500, { error: { code: 'publish', message: e.message } })
		);
	});
	await new Promise<void>((resolve, reject) => {
		control.once('error', reject);
		control.listen(BROKER_CONTROL_PORT, '127.0.0.1', () => resolve());
	});
	log(`control on 127.0.0.1:${(control.address() as AddressInfo).port}`);
	return {
		broker,
		env: { VTP_BROKER: `127.0.0.1:${broker.vtpPort}`, VTP_ARCHIVE_URL: broker.httpBase },
		stop: async () => {
			control.close();
			await broker.stop();
		}
	};
}

/** From a test: publish one step of a scenario and wait until the app has acked it. */
export async function publishStep(scenario: string, index: number): Promise<{ acked: number; sourceEventId: string; kind: string }> {
	const res = await fetch(`${BROKER_CONTROL_URL}/scenarios/${scenario}/steps/${index}`, { method: 'POST' });
	if (!res.ok) throw new Error(`publishing ${scenario} step ${index}: ${res.status} ${await res.text()}`);
	return res.json();
}

/** From a test: wait until the app's alert listener is subscribed. */
export async function waitForSubscriber(timeoutMs = 20_000): Promise<void> {
	const until = Date.now() + timeoutMs;
	while (Date.now() < until) {
		const res = await fetch(`${BROKER_CONTROL_URL}/health`);
		if (res.ok && ((await res.json()) as { subscribers: number }).subscribers > 0) return;
		await new Promise((r) => setTimeout(r, 200));
	}
	throw new Error('the app never subscribed to the fake broker');
}
