// Every derived expression of every sample, checked numerically: a short simulated
// trajectory, the backward pass driven by the derivation (compiled, not hand-written),
// and central finite differences of the simulated loss for every synapse weight, input
// weight, parameter (all of them, not only the trainable ones) and initial state.
// The adjoint flow, the spike jumps with phi and gdot, the coupling terms, the incoming
// jumps, the weight gradients and the parameter increments all enter these gradients.
// Method: EventProp (Wunderlich & Pehle 2021, Sci. Rep. 11:12829) in the general hybrid
// form of docs/adjoint.md "The formulas"; tolerances are ours (FD with relative step 1e-5
// on a DOPRI5 simulation with rtol 1e-12 is good to about 1e-7..1e-6 relative).
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { derivationFor } from '../server/src/adjoint';
import { gradientCheck, formatReport } from './helpers/gradientCheck';
import { fdCases } from './helpers/fdCases';
import { neuronsOf, sampleText } from './helpers/models';

const derive = (m: Parameters<typeof derivationFor>[0]) => derivationFor(m, { params: 'all' });
const cases = fdCases();

describe('finite-difference check of the derived adjoints', () => {
  for (const { name, source, c } of cases) {
    test(`${name} (${source})`, () => {
      const r = gradientCheck({ ...c, sim: { rtol: 1e-12 } }, derive, { relStep: 1e-5 });
      console.log(`${name}: ${r.spikes} spikes, ${r.rows.length} gradients, max relative error ${r.maxRelError.toExponential(2)}\n${formatReport(r)}`);
      expect(r.rows.filter((x) => x.unstable)).toEqual([]);
      expect(r.maxRelError).toBeLessThan(2e-5);
      // Every firing model in the case fired, so its spike formulas were exercised.
      const firing = c.net.neurons.map((n, i) => (n.model.fire ? i : -1)).filter((i) => i >= 0);
      for (const i of firing) expect(r.trajectory.spikes.some((s) => s.neuron === i)).toBe(true);
      // Gradients are not trivially zero.
      expect(r.rows.filter((x) => Math.abs(x.fd) > 0).length).toBeGreaterThan(r.rows.length / 2);
    });
  }

  test('every well-formed neuron of every sample is covered by a case', () => {
    const names = new Set(cases.flatMap((x) => x.c.net.neurons.map((n) => n.model.name)));
    const dir = join(__dirname, '..', 'samples');
    for (const f of readdirSync(dir).filter((x) => x.endsWith('.saltus'))) {
      let neurons;
      try { neurons = neuronsOf(sampleText(f)); } catch { continue; } // samples with deliberate errors
      for (const n of neurons.values()) expect(names.has(n.name), `${f}: ${n.name} has no finite-difference case`).toBe(true);
    }
  });
});
