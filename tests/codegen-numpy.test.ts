// The NumPy target (docs/codegen.md): generated model modules, the batched grid runtime and
// the runner `run.py NET.json --dt ... --format json`, run with python3 + numpy, against
// Saltus's own grid simulator (server/src/grid/, itself checked against finite differences
// and the exact gradient in tests/grid.test.ts): the same spikes, loss and gradients to 1e-12
// relative in float64, on every sample scenario and on a recurrent network with two trials and
// each classification loss (tests/helpers/gridCompare.ts). Scenario data: invented pump-sensor
// spike patterns.
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, test } from 'vitest';
import { numpyPython } from './helpers/python';
import { CELL, CELL_LOSSES, type RunnerReport, runNumpyRunner, SAMPLE_SCENARIOS, cellNetwork, compareWithGrid, sampleNetwork } from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-numpy-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();

const runGenerated = (name: string, modelText: string, netJson: unknown, dt: string): RunnerReport =>
  runNumpyRunner(python!, join(work, name), name, modelText, netJson, dt);

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
