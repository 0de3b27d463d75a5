// The generated e-prop phases of the NumPy target (codegen/python/eprop.ts, runtime.py's
// eprop_layer, run.py --rule eprop): the gradient of generated code against PyTorch BPTT of the
// same discrete model (float64), the arrays it keeps against the planner (within 10 %), and a
// few epochs of training on the demo layer (the loss falls).
import { describe, expect, it } from 'vitest';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { runCli, root } from './helpers/cli';
import { analyse } from '../server/src/pipeline';
import { planTraining } from '../server/src/plan/plan';
import { readFileSync } from 'node:fs';
import { lcg as rng } from './helpers/lcg';


const python = numpyPython();
const torch = torchPython();
const dir = mkdtempSync(join(tmpdir(), 'saltus-eprop-gen-'));

function generate(): void {
  const r = runCli(['generate', 'samples/adaptive_lif.saltus', '--target', 'numpy', '--out', dir, '--network', 'samples/scenarios/adaptive_lif.json']);
  expect(r.code, r.stderr).toBe(0);
}

/** The demo layer: made-up pump-sensor input trains into 5 adapting neurons and 2 leaky readouts. */
function task(trials: number, T: number, seed: number): Record<string, unknown> {
  const r = rng(seed);
  const nIn = 6, N = 5, K = 2;
  return {
    model: 'AdaptiveLif', kappa: Math.exp(-1e-3 / 0.02),
    inputs: Array.from({ length: trials }, () => Array.from({ length: T }, () => Array.from({ length: nIn }, () => (r() < 0.08 ? 1 : 0)))),
    win: Array.from({ length: N }, () => Array.from({ length: nIn }, () => 0.5 + 2.5 * r())),
    wout: Array.from({ length: K }, () => Array.from({ length: N }, () => r() - 0.3)),
    targets: Array.from({ length: trials }, () => Array.from({ length: T }, (_, t) => [Math.sin(t / 30), Math.cos(t / 45)])),
  };
}

describe('generated e-prop (NumPy target, run.py --rule eprop)', () => {
  it.skipIf(!python || !torch)('equals BPTT of the same discrete model in PyTorch autograd (float64) to 1e-10 in one trial', () => {
    generate();
    const t = task(1, 300, 2026);
    writeFileSync(join(dir, 'task.json'), JSON.stringify(t));
    const got = JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json'], dir)) as
      { loss: number; spikes: number; weights: number[][]; params: Record<string, number>; kept_bytes: number };
    const n = analyse(readFileSync(join(root, 'samples', 'adaptive_lif.saltus'), 'utf8')).model.neurons[0]!;
    const params = Object.fromEntries(n.params.map((p) => [p.name, p.valueSI!]));
    const problem = { dt: 1e-3, T: 300, kappa: t.kappa, params, inputs: (t.inputs as number[][][])[0], win: t.win, wout: t.wout, targets: (t.targets as number[][][])[0] };
    const want = JSON.parse(runPython(torch!, [join(__dirname, 'helpers', 'eprop_bptt.py')], root, JSON.stringify(problem))) as
      { loss: number; gradWin: number[][]; gradBeta: number; spikes: number };
    expect(got.spikes).toBe(want.spikes);
    expect(got.spikes).toBeGreaterThan(20);
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const a = got.weights.flat(), b = want.gradWin.flat();
    const rel = Math.max(...a.map((v, i) => Math.abs(v - b[i]!))) / Math.max(...b.map(Math.abs));
    const relBeta = Math.abs(got.params.beta! - want.gradBeta) / Math.abs(want.gradBeta);
    console.log(`generated e-prop vs BPTT: ${got.spikes} spikes, max rel. difference ${rel.toExponential(2)} (weights), ${relBeta.toExponential(2)} (beta)`);
    expect(rel).toBeLessThan(1e-10);
    expect(relBeta).toBeLessThan(1e-10);
  }, 180_000);

  it.skipIf(!python)('keeps the memory the planner predicts (within 10 %), the same for T = 100 and T = 400', () => {
    generate();
    const n = analyse(readFileSync(join(root, 'samples', 'adaptive_lif.saltus'), 'utf8')).model.neurons[0]!;
    for (const T of [100, 400]) {
      const t = task(3, T, 7);
      writeFileSync(join(dir, 'task.json'), JSON.stringify(t));
      const got = JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json'], dir)) as { kept_bytes: number };
      const plan = planTraining(n, { neurons: 5, fanIn: 6, steps: T, batch: 3, rate: 0.02, bytes: 8 });
      const predicted = plan.methods.find((m) => m.method === 'eprop')!.bytes;
      console.log(`e-prop memory, T = ${T}: measured ${got.kept_bytes} bytes of NumPy arrays, planned ${predicted}`);
      expect(Math.abs(got.kept_bytes - predicted) / predicted).toBeLessThan(0.1);
    }
  }, 180_000);

  it.skipIf(!python)('trains the demo layer: the loss falls over a few epochs (exact and random feedback)', () => {
    generate();
    writeFileSync(join(dir, 'task.json'), JSON.stringify(task(2, 200, 11)));
    for (const feedback of ['exact', 'random']) {
      const out = JSON.parse(runPython(python!, ['run.py', 'task.json', '--dt', '1ms', '--rule', 'eprop', '--format', 'json',
        '--feedback', feedback, '--epochs', '12', '--lr', '2e-4'], dir)) as { losses: number[] };
      console.log(`e-prop training (${feedback} feedback): losses ${out.losses.map((l) => l.toFixed(1)).join(' ')}`);
      expect(out.losses.every(Number.isFinite)).toBe(true);
      expect(out.losses.at(-1)!).toBeLessThan(0.8 * out.losses[0]!);
    }
  }, 180_000);
});
