// Receptors (several incoming blocks, projections `via` one of them) in generated code: the
// NumPy runner on the receptors sample scenario (the same pair of populations projected into
// both blocks) agrees with Saltus's own grid simulator (server/src/grid/, checked against
// finite differences and the exact gradient of the accurate simulator in
// tests/receptors.test.ts) to 1e-12 relative in float64. Scenario data: invented pump-sensor
// spike patterns.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { numpyPython, runPython } from './helpers/python';
import { type RunnerReport, compareWithGrid, sampleNetwork } from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-receptors-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();

function runNumpy(name: string, modelText: string, netJson: unknown, dt: string): RunnerReport {
  const dir = join(work, name);
  const g = generateFiles(analyse(modelText), { target: 'numpy', network: netJson, source: `${name}.saltus` });
  expect(g.errors).toEqual([]);
  const w = writeGenerated(dir, g.files, {});
  expect(w.errors).toEqual([]);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(netJson));
  return JSON.parse(runPython(python!, ['run.py', 'net.json', '--dt', dt, '--format', 'json'], dir)) as RunnerReport;
}

describe.skipIf(!python)('NumPy target with receptors', () => {
  test('receptors sample scenario at dt = 0.1 ms: the same spikes, loss and gradients as the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    expect(net.projections.map((p) => p.receptor ?? 0)).toEqual([0, 1, 1, 0]);
    const r = compareWithGrid('NumPy runner', 'receptors', net, 1e-4, runNumpy('receptors', text, json, '0.1ms'));
    expect(r.spikes).toBeGreaterThan(3);
  }, 300_000);

  test('a projection without "via" into a model with several blocks stops the runner with a message', () => {
    const { text, json } = sampleNetwork('receptors');
    const bad = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    delete bad.projections[1]!.via;
    expect(() => runNumpy('receptors_novia', text, bad, '0.1ms')).toThrow(/projections\[1\]: Balanced has 2 incoming blocks \(w_exc, w_inh\)/);
  }, 300_000);
});
