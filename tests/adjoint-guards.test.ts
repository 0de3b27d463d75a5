// Guard diagnostics (adjoint/derive.ts zeroSlope, adjoint/guardFacts.ts): a guard slope that
// is identically 0 on the threshold (an error; nothing is derived, nothing divides by 0), a
// guard the flow can never cross in its direction (information where an incoming jump could
// still carry the neuron across, a warning where nothing can), a reset that leaves the
// neuron on or beyond its threshold (a warning with quick fixes), and the grazing set as
// information. The published models of samples/ (LIF, AdEx, Izhikevich, adaptive threshold)
// must get none of the errors or warnings: each can fire through its flow.
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse, derivedDiagnostics } from '../server/src/pipeline';
import { adjointDiagnostics, adjointHoverMarkdown, deriveNeuron } from '../server/src/adjoint';
import { adjointBadge, previewModel } from '../server/src/adjoint/preview';
import { generateFiles } from '../server/src/codegen';
import { sampleText } from './helpers/models';
import { runCli } from './helpers/cli';

const neuron = (text: string, name?: string) => {
  const a = analyse(text);
  expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
  return a.model.neurons.find((n) => !name || n.name === name)!;
};
const codes = (text: string) => {
  const a = analyse(text);
  return derivedDiagnostics(a).map((d) => ({ code: d.code, severity: d.severity, at: text.slice(d.range.start, d.range.end), message: d.message, fixes: d.fixes }));
};

// Three ways for a guard slope to be identically 0.
const JUMP_ONLY = `neuron Counter {  #~ counts input spikes; the guard state has no flow
  param n_max = 3
  state c = 0
  state V = 0
  dV/dt = -V / 10 [ms]
  fire when c crosses n_max up { c := 0 }
  incoming w { c := c + w }
}`;
const NO_STATE = `neuron Constant {  #~ the guard holds parameters only
  param a = 1
  param b = 2
  state V = 0
  dV/dt = -V / 10 [ms]
  fire when a crosses b up { V := 0 }
}`;
// dV/dt = (theta - V)/tau relaxes to theta exponentially: on V = theta the slope is 0.
const ASYMPTOTIC = `neuron Relax {  #~ the flow only approaches the threshold
  param theta = 1
  param tau = 10 [ms]
  state V = 0
  dV/dt = (theta - V) / tau
  fire when V crosses theta up { V := 0 }
  incoming w { V := V + w }
}`;

describe('a guard slope that is identically 0 is an error, and nothing is derived from it', () => {
  test.each([
    ['a guard with no state', NO_STATE, /the guard a - b = 0 holds no state and no t.*gdot = 0/],
    ['a flow that only approaches the threshold', ASYMPTOTIC, /on the threshold, where V = theta, the guard slope gdot = \(theta - V\) \/ tau is identically 0/],
  ])('%s', (_name, text, message) => {
    const n = neuron(text);
    const d = deriveNeuron(n);
    expect(d.wellFormed).toBe(false);
    expect(d.notDerived).toBe('the guard slope is identically 0');
    expect(d.spike).toBeNull(); // no phi = .../gdot was built
    const ds = adjointDiagnostics(d, n);
    expect(ds).toHaveLength(1);
    expect(ds[0]).toMatchObject({ code: 'zero-guard-slope', severity: 'error' });
    expect(ds[0]!.message).toMatch(message);
    expect(text.slice(ds[0]!.range.start, ds[0]!.range.end)).toMatch(/^fire when .* up$/);
    // The CodeLens badge, the preview and the hover say why.
    expect(adjointBadge(d)).toBe('adjoint: not derived (the guard slope is identically 0)');
    const p = previewModel(d);
    expect(p.sections).toEqual([]);
    expect(p.notes.join(' ')).toMatch(message);
    expect(adjointHoverMarkdown(d, { kind: 'fire' })).toMatch(/not derived: .*gdot/);
    // Generated code refuses with the reason instead of dividing by 0.
    const g = generateFiles(analyse(text), { target: 'numpy' });
    expect(g.errors.join(' ')).toMatch(/could not be derived: .*guard slope/);
  });

  test('saltus check exits 1 on each (before: silent, exit 0)', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-guards-'));
    for (const [k, text] of [NO_STATE, ASYMPTOTIC].entries()) {
      const file = join(dir, `zero${k}.saltus`);
      writeFileSync(file, text);
      const r = runCli(['check', file]);
      expect(r.code, `model ${k}: ${r.stdout}${r.stderr}`).toBe(1);
      expect(r.stdout).toMatch(/error zero-guard-slope/);
    }
  });

  test('a guard state without a flow that an incoming jump moves (a spike counter) fires by jumps: information, derived', () => {
    // docs/language.md "Spikes fired by jumps": the jump-fired machinery handles it, so it is
    // no longer the error it was (tests/quiet-adjoint.test.ts checks its gradients).
    const n = neuron(JUMP_ONLY);
    const d = deriveNeuron(n);
    expect(d.wellFormed).toBe(true);
    expect(d.spike?.byJumpsOnly).toBe(true);
    const ds = adjointDiagnostics(d, n);
    expect(ds.map((x) => [x.code, x.severity])).toEqual([['fires-only-by-jumps', 'info']]);
    expect(ds[0]!.message).toMatch(/the guard's state c has no flow and changes only by jumps/);
    // generated code runs it (the runners against the grid: tests/jump-fired-codegen.test.ts)
    expect(generateFiles(analyse(JUMP_ONLY), { target: 'numpy' }).errors).toEqual([]);
    // without an incoming jump on it, it can never fire: still the error
    const still = JUMP_ONLY.replace('incoming w { c := c + w }', 'incoming w { V := V + w }');
    expect(adjointDiagnostics(deriveNeuron(neuron(still)), neuron(still)).map((x) => x.code)).toEqual(['zero-guard-slope']);
  });

  test('a slope that is 0 only for the file\'s parameter values is an error too', () => {
    const text = `neuron Balanced { param E_L = -50 [mV]\n param V_th = -50 [mV]\n param tau = 10 [ms]\n state V = -70 [mV]\n dV/dt = (E_L - V) / tau\n fire when V crosses V_th up { V := -70 [mV] }\n incoming w [mV] { V := V + w } }`;
    const z = codes(text).filter((d) => d.code === 'zero-guard-slope');
    expect(z).toHaveLength(1);
    expect(z[0]!.message).toMatch(/with the file's parameter values the guard slope on the threshold \(where V = V_th\) is 0/);
  });
});

describe('a guard the flow can never cross in its direction', () => {
  // LIF with voltage jumps and its leak below the threshold (E_L < V_th): on V = V_th the
  // slope (E_L - V_th)/tau_m = -20 mV / 10 ms = -2 mV/ms < 0, so the flow never rises through it.
  const DELTA_LIF = (incoming: boolean) => `neuron DeltaLif {
  param E_L = -70 [mV]
  param V_th = -50 [mV]
  param V_reset = -65 [mV]
  param tau_m = 10 [ms]
  state V = -70 [mV]
  dV/dt = (E_L - V) / tau_m
  fire when V crosses V_th up { V := V_reset }${incoming ? '\n  incoming w [mV] { V := V + w }' : ''}
}`;

  test('information where an incoming jump could carry it across (it fires by jumps only)', () => {
    const ds = codes(DELTA_LIF(true));
    expect(ds.map((d) => [d.code, d.severity])).toEqual([['fires-only-by-jumps', 'info']]);
    expect(ds[0]!.message).toMatch(/the flow never reaches the threshold from below: .*gdot = \(E_L - V_th\) \/ tau_m is negative .*\(-2 \[mV\/ms\]\)/);
    expect(ds[0]!.message).toMatch(/fires only if an incoming jump carries it across: it then fires at that arrival's instant/);
    expect(ds[0]!.at).toBe('fire when V crosses V_th up');
  });

  test('a warning where nothing can: it never fires', () => {
    const ds = codes(DELTA_LIF(false));
    expect(ds.map((d) => [d.code, d.severity])).toEqual([['never-fires', 'warning']]);
    expect(ds[0]!.message).toMatch(/no incoming jump moves V: this neuron can never fire/);
  });

  test('with a current input the slope on the threshold depends on I: nothing is said (it can fire)', () => {
    const text = DELTA_LIF(false).replace('(E_L - V) / tau_m', '(E_L - V + I) / tau_m').replace('state V = -70 [mV]', 'state V = -70 [mV]\n  state I [mV] = 0 [mV]\n  dI/dt = -I / 5 [ms]')
      .replace('}\n}', '}\n  incoming w [mV] { I := I + w }\n}');
    expect(codes(text).filter((d) => d.code !== 'grazing-crossing')).toEqual([]);
  });

  test('a downward guard whose flow only rises is flagged from above', () => {
    const text = `neuron Riser { param tau = 10 [ms]\n param floor = -1\n state V = 0\n dV/dt = (1 - V) / tau + 1 / tau\n fire when V crosses floor down { V := 0 } }`;
    // On V = floor = -1 the slope is (1 + 1)/tau + 1/tau > 0: never downward.
    const ds = codes(text);
    expect(ds.map((d) => d.code)).toEqual(['never-fires']);
    expect(ds[0]!.message).toMatch(/from above: .* is positive/);
  });
});

describe('a reset that leaves the neuron on its threshold or beyond', () => {
  const LIF = (reset: string) => `neuron L {
  param E_L = -70 [mV]
  param V_th = -50 [mV]
  param V_reset = -65 [mV]
  param tau_m = 10 [ms]
  state V = -70 [mV]
  state I [mV] = 0 [mV]
  dV/dt = (E_L - V + I) / tau_m
  dI/dt = -I / 5 [ms]
  fire when V crosses V_th up { V := ${reset} }
  incoming w [mV] { I := I + w }
}`;

  test('V := V_th with an up crossing: a warning on the jump, with fixes to reset below the threshold', () => {
    const text = LIF('V_th');
    const ds = codes(text).filter((d) => d.code === 'reset-on-threshold');
    expect(ds).toHaveLength(1);
    expect(ds[0]).toMatchObject({ severity: 'warning', at: 'V := V_th' });
    expect(ds[0]!.message).toMatch(/leaves the neuron on its threshold/);
    expect(ds[0]!.fixes!.map((f) => f.title)).toEqual(['Reset V to E_L (-70 mV)', 'Reset V to V_reset (-65 mV)']);
    // Applying the preferred fix removes the warning.
    const fix = ds[0]!.fixes!.find((f) => f.preferred)!;
    const e = fix.edits[0]!;
    const fixed = text.slice(0, e.range.start) + e.newText + text.slice(e.range.end);
    expect(fixed).toContain('V := E_L');
    expect(codes(fixed).filter((d) => d.code === 'reset-on-threshold')).toEqual([]);
  });

  test('a reset above the threshold (the fired side) is warned about too; one below is not', () => {
    const above = codes(LIF('-45 [mV]')).filter((d) => d.code === 'reset-on-threshold');
    expect(above).toHaveLength(1);
    expect(above[0]!.message).toMatch(/on the side it fires from \(the guard is 0\.005 just after the spike\)/);
    expect(codes(LIF('V_reset')).filter((d) => d.code === 'reset-on-threshold')).toEqual([]);
    expect(codes(LIF('V - 20 [mV]')).filter((d) => d.code === 'reset-on-threshold')).toEqual([]); // V_th - 20 mV after the spike: below
  });

  test('a reset whose place depends on another state says nothing (unsure)', () => {
    expect(codes(LIF('V - I')).filter((d) => d.code === 'reset-on-threshold')).toEqual([]);
  });
});

describe('the samples (LIF, AdEx, Izhikevich, adaptive threshold) can fire: no guard error or warning', () => {
  test.each(['lif_current.saltus', 'adex.saltus', 'izhikevich.saltus', 'adaptive_lif.saltus'])('%s', (file) => {
    const ds = codes(sampleText(file));
    expect(ds.filter((d) => d.severity === 'error' || d.severity === 'warning')).toEqual([]);
    expect(ds.filter((d) => ['zero-guard-slope', 'fires-only-by-jumps', 'never-fires', 'reset-on-threshold'].includes(d.code))).toEqual([]);
    // The grazing set stays, as information with its formula.
    const g = ds.filter((d) => d.code === 'grazing-crossing');
    expect(g).toHaveLength(1);
    expect(g[0]!.severity).toBe('info');
    expect(g[0]!.message).toMatch(/the crossing is not transversal when .* = /);
  });

  test('saltus check samples/lif_current.saltus prints no warning (before: one grazing-crossing warning)', () => {
    const r = runCli(['check', 'samples/lif_current.saltus']);
    expect(r.code).toBe(0);
    expect(r.stdout).not.toMatch(/: warning /);
    expect(r.stdout).toMatch(/0 errors, 0 warnings, 1 info/);
  });

  test('the grazing formula stays in the hover and the preview', () => {
    const n = neuron(sampleText('lif_current.saltus'), 'LifCurrent');
    const d = deriveNeuron(n);
    expect(adjointHoverMarkdown(d, { kind: 'fire' })).toMatch(/Grazing set:.*when I = theta/);
    expect(previewModel(d).sections.find((s) => s.title.startsWith('At a spike'))!.note).toMatch(/Grazing set: .*when I = theta/);
  });
});
