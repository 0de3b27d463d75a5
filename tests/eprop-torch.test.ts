// The e-prop phases of the PyTorch target (docs/eprop.md, "Generated code"): `run.py --rule eprop`
// of the torch package against the NumPy package on the same task (the same derived formulas on
// another array library: to 1e-12), the layer API `eprop_backward` against backpropagation
// through time of the same discrete model in PyTorch autograd (an independent library:
// tests/helpers/eprop_bptt.py, float64, to 1e-10), and a torch optimizer stepping on e-prop's
// gradients lowers the loss. PyTorch only from Debian's /usr/bin/python3 (torch 1.13).
import { describe, expect, it } from 'vitest';
import { mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { runCli, root } from './helpers/cli';
import { analyse } from '../server/src/pipeline';
import { lcg as rng } from './helpers/lcg';


const python = numpyPython();
const torch = torchPython();
const base = mkdtempSync(join(tmpdir(), 'saltus-eprop-torch-'));
const npDir = join(base, 'np');
const pkgDir = join(base, 'eprop_pkg');

function generate(): void {
  for (const [target, out] of [['numpy', npDir], ['torch', pkgDir]] as const) {
    mkdirSync(out, { recursive: true });
    const r = runCli(['generate', 'samples/adaptive_lif.saltus', '--target', target, '--out', out, '--network', 'samples/scenarios/adaptive_lif.json', '--force']);
    expect(r.code, r.stderr).toBe(0);
  }
}

/** Made-up pump-sensor input trains into 5 adapting neurons and 2 leaky readouts. */
function task(trials: number, T: number, seed: number): { model: string; kappa: number; inputs: number[][][]; win: number[][]; wout: number[][]; targets: number[][][] } {
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

const relMax = (a: number[], b: number[]): number => Math.max(...a.map((v, i) => Math.abs(v - b[i]!))) / Math.max(...b.map(Math.abs));

interface Grad { loss: number; spikes: number; weights: number[][]; readout: number[][]; params: Record<string, number>; kept_bytes: number }

/** Uses the generated package as a user would: the layer class, its eprop method, a torch optimizer. */
const LAYER_SCRIPT = `
import json, sys, torch
sys.path.insert(0, ${JSON.stringify(base)})
import eprop_pkg as pkg
t = json.load(sys.stdin)
win, wout = torch.tensor(t["win"], dtype=torch.float64), torch.tensor(t["wout"], dtype=torch.float64)
inputs, targets = torch.tensor(t["inputs"], dtype=torch.float64), torch.tensor(t["targets"], dtype=torch.float64)
layer = pkg.AdaptiveLifLayer(win.shape[1], win.shape[0], 1e-3, inputs.shape[1] * 1e-3)
with torch.no_grad():
    layer.weight.copy_(win)
readout = torch.nn.Parameter(wout.clone())
if t.get("epochs"):
    opt = torch.optim.SGD([layer.weight, readout], lr=t["lr"])  # the weights, as the NumPy trainer
    losses = []
    for _ in range(t["epochs"]):
        opt.zero_grad()
        losses.append(layer.eprop(inputs, targets, readout, t["kappa"], feedback=t.get("feedback", "exact"))["loss"])
        opt.step()
    print(json.dumps({"losses": losses}))
else:
    out = pkg.eprop_backward(layer, inputs, targets, readout, t["kappa"])
    print(json.dumps({"loss": out["loss"], "spikes": out["spikes"], "weights": layer.weight.grad.tolist(),
                      "readout": readout.grad.tolist(), "beta": layer.model_params["beta"].grad.item()}))
`;

describe('e-prop in the PyTorch target', () => {
  it.skipIf(!python || !torch)('run.py --rule eprop of the torch package equals the NumPy package to 1e-12 (exact and random feedback)', () => {
    generate();
    const t = task(3, 300, 2027);
    writeFileSync(join(base, 'task.json'), JSON.stringify(t));
    for (const feedback of ['exact', 'random']) {
      const args = [join(base, 'task.json'), '--dt', '1ms', '--rule', 'eprop', '--format', 'json', '--feedback', feedback];
      const np = JSON.parse(runPython(python!, ['run.py', ...args], npDir)) as Grad;
      const th = JSON.parse(runPython(torch!, ['run.py', ...args], pkgDir)) as Grad;
      expect(th.spikes).toBe(np.spikes);
      expect(np.spikes).toBeGreaterThan(30);
      const rw = relMax(th.weights.flat(), np.weights.flat()), ro = relMax(th.readout.flat(), np.readout.flat());
      const rb = Math.abs(th.params.beta! - np.params.beta!) / Math.abs(np.params.beta!);
      console.log(`torch vs NumPy e-prop (${feedback}): ${np.spikes} spikes, max rel. difference ${rw.toExponential(2)} (weights), ${ro.toExponential(2)} (readout), ${rb.toExponential(2)} (beta)`);
      // source: the NumPy target's e-prop (tests/eprop-codegen.test.ts checks it against autograd BPTT)
      expect(Math.abs(th.loss - np.loss) / np.loss).toBeLessThan(1e-12);
      expect(rw).toBeLessThan(1e-12);
      expect(ro).toBeLessThan(1e-12);
      expect(rb).toBeLessThan(1e-12);
      expect(th.kept_bytes).toBe(np.kept_bytes);
    }
  }, 240_000);

  it.skipIf(!torch)('the layer API (eprop_backward into .grad) equals BPTT in PyTorch autograd (float64) to 1e-10', () => {
    generate();
    const t = task(1, 300, 2026);
    const got = JSON.parse(runPython(torch!, ['-c', LAYER_SCRIPT], base, JSON.stringify(t))) as
      { loss: number; spikes: number; weights: number[][]; readout: number[][]; beta: number };
    const n = analyse(readFileSync(join(root, 'samples', 'adaptive_lif.saltus'), 'utf8')).model.neurons[0]!;
    const params = Object.fromEntries(n.params.map((p) => [p.name, p.valueSI!]));
    const problem = { dt: 1e-3, T: 300, kappa: t.kappa, params, inputs: t.inputs[0], win: t.win, wout: t.wout, targets: t.targets[0] };
    // source: backpropagation through time by PyTorch autograd (tests/helpers/eprop_bptt.py), an independent library
    const want = JSON.parse(runPython(torch!, [join(__dirname, 'helpers', 'eprop_bptt.py')], root, JSON.stringify(problem))) as
      { loss: number; gradWin: number[][]; gradBeta: number; spikes: number };
    expect(got.spikes).toBe(want.spikes);
    expect(got.spikes).toBeGreaterThan(20);
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const rw = relMax(got.weights.flat(), want.gradWin.flat());
    const rb = Math.abs(got.beta - want.gradBeta) / Math.abs(want.gradBeta);
    console.log(`torch layer e-prop vs autograd BPTT: ${got.spikes} spikes, max rel. difference ${rw.toExponential(2)} (weights), ${rb.toExponential(2)} (beta)`);
    expect(rw).toBeLessThan(1e-10);
    expect(rb).toBeLessThan(1e-10);
  }, 240_000);

  it.skipIf(!torch)('a torch optimizer stepping on e-prop gradients lowers the loss (exact and random feedback)', () => {
    generate();
    for (const feedback of ['exact', 'random']) {
      const t = { ...task(2, 200, 11), epochs: 12, lr: 2e-4, feedback };
      const out = JSON.parse(runPython(torch!, ['-c', LAYER_SCRIPT], base, JSON.stringify(t))) as { losses: number[] };
      console.log(`torch e-prop training (${feedback} feedback): losses ${out.losses.map((l) => l.toFixed(1)).join(' ')}`);
      expect(out.losses.every(Number.isFinite)).toBe(true);
      expect(out.losses.at(-1)!).toBeLessThan(0.8 * out.losses[0]!);
    }
  }, 240_000);
});
