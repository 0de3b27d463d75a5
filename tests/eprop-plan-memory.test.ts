// The planner's BPTT and EventProp figures (plan/plan.ts) against measured memory of the
// generated PyTorch code of samples/adaptive_lif.saltus (tests/helpers/plan_memory.py; the
// e-prop figure is checked in tests/eprop-codegen.test.ts and tests/eprop-c.test.ts):
// - BPTT with a surrogate, run on the generated kernels with one autograd Function per step that
//   keeps the state at the start of the step and the spike (its gradient equals plain autograd
//   through the same kernels); measured: the bytes of every tensor autograd saves, seen through
//   torch.autograd.graph.saved_tensors_hooks, once per storage, the task's data and weights left out;
// - EventProp: the generated layer's forward (GridLayerFunction), measured by
//   saltus_torch.kept_bytes (every tensor its event log and checkpoints hold, once per storage),
//   against the planner's estimate of the generated event log (`generatedBytes`), with the
//   measured firing rates as the planner's rates. Within 10 % for T = 100 and 300 (the bound
//   the planner's checks use); the derivation's minimum and plain autograd BPTT are printed beside them.
import { describe, expect, it } from 'vitest';
import { mkdirSync, mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { runPython, torchPython } from './helpers/python';
import { runCli, root } from './helpers/cli';
import { analyse } from '../server/src/pipeline';
import { planTraining } from '../server/src/plan/plan';

const torch = torchPython();
const base = mkdtempSync(join(tmpdir(), 'saltus-plan-mem-'));

interface Measured { bptt_bytes: number; bptt_plain_bytes: number; bptt_spikes: number; grad_rel_diff: number; eventprop_bytes: number; eventprop_spikes: number; input_spikes: number }

describe('the planner against measured memory of the generated PyTorch code', () => {
  it.skipIf(!torch)('BPTT (saved-tensor hooks) and EventProp (the layer\'s kept tensors) within 10 % for T = 100 and 300', () => {
    const out = join(base, 'pkg');
    mkdirSync(out, { recursive: true });
    const g = runCli(['generate', 'samples/adaptive_lif.saltus', '--target', 'torch', '--out', out, '--force']);
    expect(g.code, g.stderr).toBe(0);
    const n = analyse(readFileSync(join(root, 'samples', 'adaptive_lif.saltus'), 'utf8')).model.neurons[0]!;
    const B = 2, N = 50, nIn = 6;
    for (const T of [100, 300]) {
      const m = JSON.parse(runPython(torch!, [join(__dirname, 'helpers', 'plan_memory.py'), base, 'pkg'], root,
        JSON.stringify({ T, B, N, n_in: nIn, seed: 1 }))) as Measured;
      expect(m.grad_rel_diff).toBeLessThan(1e-12);
      expect(m.eventprop_spikes).toBeGreaterThan(100);
      const rate = m.eventprop_spikes / (B * N * T), inputRate = m.input_spikes / (B * nIn * T);
      const plan = planTraining(n, { neurons: N, fanIn: nIn, steps: T, batch: B, rate, inputRate, bytes: 8 });
      const bptt = plan.methods.find((x) => x.method === 'bptt')!;
      const ev = plan.methods.find((x) => x.method === 'eventprop')!;
      // source: the planner (plan/plan.ts) against the measured bytes (see the header)
      const eb = Math.abs(m.bptt_bytes - bptt.bytes) / bptt.bytes;
      const ee = Math.abs(m.eventprop_bytes - ev.generatedBytes!) / ev.generatedBytes!;
      console.log(`T = ${T}: BPTT measured ${m.bptt_bytes} bytes, planned ${bptt.bytes} (${(100 * eb).toFixed(1)} %); plain autograd BPTT keeps ${m.bptt_plain_bytes} (${(m.bptt_plain_bytes / bptt.bytes).toFixed(2)} of the plan). ` +
        `EventProp measured ${m.eventprop_bytes} bytes, planned for the generated event log ${Math.round(ev.generatedBytes!)} (${(100 * ee).toFixed(1)} %); the derivation's minimum ${Math.round(ev.bytes)}`);
      expect(eb).toBeLessThan(0.1);
      expect(ee).toBeLessThan(0.1);
    }
  }, 300_000);
});
