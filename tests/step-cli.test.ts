// `saltus step` and the step analysis in the editor faces: the JSON contract of
// docs/step-analysis.md, the exit status for an unstable step, the dt override, and the
// hovers on `timestep` and on an equation.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse, derivedDiagnostics } from '../server/src/pipeline';
import { hover } from '../server/src/outputs/hover';
import { DERIVED_SECTIONS } from '../server/src/outputs/derivedHover';
import { root, runCli } from './helpers/cli';

describe('saltus step', () => {
  test('JSON has exactly the documented keys, in SI seconds', () => {
    const r = runCli(['step', 'samples/adex.saltus', '--format', 'json']);
    expect(r.code).toBe(0);
    const m = JSON.parse(r.stdout).models[0];
    expect(Object.keys(m).sort()).toEqual(['dt_s', 'exactPropagator', 'exactRadius', 'maxStableDt_s', 'name', 'reference', 'relativeStepError', 'stepRadius', 'states'].sort());
    expect(m.dt_s).toBeCloseTo(1e-4, 15);
    expect(m.reference).toBe('rest');
    expect(m.states.V.scheme).toBe('linearised-exponential-euler');
    expect(m.exactPropagator).toBeNull();
  });
  // A damped oscillator x' = v, v' = -w2 x - g v under the simultaneous exponential-Euler update
  // (x explicit, v exponential in -g): the step matrix [[1, dt], [-w2 (1 - e^(-g dt))/g, e^(-g dt)]]
  // has determinant e^(-g dt) + w2 dt (1 - e^(-g dt))/g, which passes 1 at dt = g / w2 (derived by
  // hand, as in tests/step-analyse.test.ts): with g = 1/ms and w2 = 1/ms^2, unstable above 1 ms.
  const OSC = (dt: string) => `timestep ${dt}\nneuron Osc { param w2 = 1 [1/ms^2]\n param g = 1 [1/ms]\n state x = 1 [mV]\n state v = 0 [mV/ms]\n dx/dt = v\n dv/dt = -w2 * x - g * v }\n`;
  test('an unstable step is an error on the timestep, with the largest stable dt', () => {
    const text = OSC('3 [ms]');
    const unstable = derivedDiagnostics(analyse(text)).find((d) => d.code === 'step-unstable');
    expect(unstable?.severity).toBe('error');
    expect(text.slice(unstable!.range.start, unstable!.range.end)).toBe('3 [ms]');
    expect(unstable!.message).toMatch(/1 ms/);
    expect(derivedDiagnostics(analyse(OSC('0.5 [ms]'))).some((d) => d.code === 'step-unstable')).toBe(false);
  });
  test('--dt overrides the file, and a file without timestep needs one', () => {
    const a = JSON.parse(runCli(['step', 'samples/lif_current.saltus', '--dt', '0.5ms', '--format', 'json']).stdout);
    expect(a.models[0].dt_s).toBeCloseTo(5e-4, 15);
    // Rotter & Diesmann 1999: P_II = exp(-h/tau_s) for the synaptic current (tau_s = 5 ms in the sample).
    expect(a.models[0].exactPropagator[1][1]).toBeCloseTo(Math.exp(-0.5 / 5), 12);
    const bad = runCli(['step', 'samples/lif_current.saltus', '--dt', '3 [mV]']);
    expect(bad.code).toBe(2);
  });
});

describe('step analysis in hovers', () => {
  const text = readFileSync(join(root, 'samples', 'izhikevich.saltus'), 'utf8');
  const a = analyse(text);
  test('on timestep: every neuron', () => {
    const h = hover(a, text.indexOf('timestep') + 2, DERIVED_SECTIONS)!;
    expect(h.markdown).toContain('Izhikevich');
    expect(h.markdown).toMatch(/spectral radius|stable/i);
  });
  test('on an equation: its scheme', () => {
    const h = hover(a, text.indexOf('dv/dt') + 1, DERIVED_SECTIONS)!;
    expect(h.markdown).toMatch(/linearised/);
  });
});
