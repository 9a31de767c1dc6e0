import { execFileSync } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import notice from './notice.ts';

const dir = fileURLToPath(new URL('../../../tests/fixtures/notices/standard/', import.meta.url));
const root = fileURLToPath(new URL('../../../', import.meta.url));
const run = async (file: string, values: Record<string, string> = {}) => (await notice.run([dir + file], values)).json as Record<string, unknown>;

describe('notice FILE --json on the VOEvent semantics fixtures', () => {
	it('reads both envelopes, CDATA/whitespace, kind only in the citations, and both non-observation roles', async () => {
		expect.hasAssertions();
		expect(await run('namespaced.xml')).toMatchObject({ sourceEventId: 'SX30050101', kind: 'preliminary', role: 'observation' });
		expect(await run('default-namespace.xml')).toMatchObject({ sourceEventId: 'SX30050202', kind: 'initial' });
		expect(await run('cdata-whitespace.xml')).toMatchObject({ sourceEventId: 'SX30050202', kind: 'update', far: 3e-12 });
		expect(await run('supersedes-only.xml')).toMatchObject({ kind: 'update', citations: [{ cite: 'supersedes' }] });
		expect(await run('test-role.xml')).toMatchObject({ role: 'test' });
		expect(await run('utility-role.xml')).toMatchObject({ role: 'utility' });
		// The output keeps the documented fields, in order.
		expect(Object.keys(await run('namespaced.xml'))).toEqual(['ivorn', 'role', 'authoredAt', 'eventTime', 'kind', 'sourceEventId', 'far', 'classification', 'properties', 'skymapUrl', 'citations']);
	});

	it('reads a retraction with an empty What once the notices it cites are given with --with', async () => {
		expect.hasAssertions();
		await expect(run('retraction-empty-what.xml')).rejects.toThrow(/^waiting for the cited notices/);
		const r = await run('retraction-empty-what.xml', { with: `${dir}namespaced.xml,${dir}supersedes-only.xml` });
		expect(r).toMatchObject({ kind: 'retraction', sourceEventId: 'SX30050101', eventTime: null, far: null });
	});

	it("reads renamed Params with --vocabulary, and refuses them without", async () => {
		expect.hasAssertions();
		await expect(run('renamed-params.xml')).rejects.toThrow(/^missing required Param SourceEventId/);
		const r = await run('renamed-params.xml', { vocabulary: dir + 'renamed-params.vocabulary.json' });
		expect(r).toMatchObject({ sourceEventId: 'A30050505', kind: 'initial', classification: { BNS: 0.6, NSBH: 0.3, BBH: 0.05, Terrestrial: 0.05 } });
		expect(r.far as number).toBeCloseTo(0.5 / 31557600, 20);
	});

	it('exits non-zero with the reason on one line when run as a command', () => {
		expect.hasAssertions();
		let status = 0;
		let stderr = '';
		try {
			execFileSync('npx', ['tsx', 'src/cli/strainline.ts', 'notice', dir + 'retraction-empty-what.xml', '--json'], { cwd: root, stdio: 'pipe' });
		} catch (e) {
			status = (e as { status: number }).status;
			stderr = String((e as { stderr: Buffer }).stderr);
		}
		expect(status).not.toBe(0);
		expect(stderr.trim().split('\n')).toHaveLength(1);
		expect(stderr).toMatch(/^strainline notice: waiting for the cited notices/);
		const out = execFileSync('npx', ['tsx', 'src/cli/strainline.ts', 'notice', dir + 'retraction-empty-what.xml', '--with', `${dir}namespaced.xml`, '--json'], { cwd: root, encoding: 'utf8' });
		expect(JSON.parse(out)).toMatchObject({ kind: 'retraction', sourceEventId: 'SX30050101' });
	}, 30_000);
});
