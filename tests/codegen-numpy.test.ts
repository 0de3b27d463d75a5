// The NumPy target (docs/codegen.md): generated model modules, the batched grid runtime and
// the runner `run.py NET.json --dt ... --format json`, run with python3 + numpy, against
// Saltus's own grid simulator (server/src/grid/, itself checked against finite differences
// and the exact gradient in tests/grid.test.ts): the same spikes, loss and gradients to 1e-12
// relative in float64, on every sample scenario and on a recurrent network with two trials and
// each classification loss (tests/helpers/gridCompare.ts). Scenario data: invented pump-sensor
// spike patterns.
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { numpyPython, runPython } from './helpers/python';
import { CELL, CELL_LOSSES, type RunnerReport, SAMPLE_SCENARIOS, cellNetwork, compareWithGrid, sampleNetwork } from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-numpy-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();

/** Generates the NumPy target with `net` as the network description, runs run.py, returns its report. */
function runGenerated(name: string, modelText: string, netJson: unknown, dt: string): RunnerReport {
  const dir = join(work, name);
  const g = generateFiles(analyse(modelText), { target: 'numpy', network: netJson, source: `${name}.saltus` });
  expect(g.errors).toEqual([]);
  const w = writeGenerated(dir, g.files, {});
  expect(w.errors).toEqual([]);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(netJson));
  return JSON.parse(runPython(python!, ['run.py', 'net.json', '--dt', dt, '--format', 'json'], dir)) as RunnerReport;
}

describe.skipIf(!python)('NumPy target: run.py agrees with the grid simulator in float64', () => {
  for (const name of SAMPLE_SCENARIOS) {
    test(`${name} sample scenario at dt = 0.1 ms`, () => {
      // the non-linear samples' sub-stepped fourth-order maps are slow in NumPy on a handful of
      // neurons (per-call overhead): their first 12 ms hold spikes in every population
      const { text, json, net } = sampleNetwork(name, name === 'adex' || name === 'izhikevich' ? 0.012 : undefined);
      compareWithGrid('NumPy runner', name, net, 1e-4, runGenerated(name, text, json, '0.1ms'));
    }, 300_000);
  }

  for (const loss of CELL_LOSSES) {
    test(`recurrent two-layer network, two trials, ${loss.kind} loss, dt = 0.5 ms`, () => {
      const { json, net } = cellNetwork(loss);
      compareWithGrid('NumPy runner', `Cell ${loss.kind}`, net, 5e-4, runGenerated(`cell_${loss.kind}`, CELL, json, '0.5ms'));
    }, 300_000);
  }
});
