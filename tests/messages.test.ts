// Messages that used to mislead, each reproduced as a modeller wrote it: a wrong parameter
// unit blamed on the equation, a unit without brackets, a unit with the wrong letter case, a
// comparison written as a threshold, and constructs of the next language version. Each case
// checks the message, the number of diagnostics, and that the first fix repairs the model.
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { applyEdits } from '../server/src/outputs/codeActions';
import type { Diagnostic } from '../server/src/base/diagnostic';

const errors = (text: string): Diagnostic[] => analyse(text).diagnostics.filter((d) => d.severity === 'error');
const applyFirst = (text: string, d: Diagnostic): string => applyEdits(text, d.fixes![0]!.edits);

// A conductance-based LIF in physical units (common practice: C_m in pF, conductances in nS).
const COND = (cm: string, gl = '10 [nS]') => `timestep 0.1 [ms]
neuron Cond {
  param C_m = ${cm}
  param g_L = ${gl}
  param E_L = -70 [mV]
  param E_exc = 0 [mV]
  param tau_syn = 5 [ms]
  param V_th = -50 [mV]
  state V = -70 [mV]
  state g [nS]
  dV/dt = (g_L * (E_L - V) + g * (E_exc - V)) / C_m
  dg/dt = -g / tau_syn
  fire when V crosses V_th up { V := E_L }
  incoming w { g := g + w }
}
`;

describe('a wrong parameter unit is blamed on the parameter', () => {
  it('C_m = 200 [nS] (for pF): the parameter first, and its fix ranks above "divide by tau_syn"', () => {
    const text = COND('200 [nS]');
    const es = errors(text);
    expect(es).toHaveLength(1);
    expect(es[0]!.message).toMatch(/^the unit of 'C_m' looks wrong: 200 \[nS\] is a conductance; as 200 \[pF\], a capacitance, the equation that uses 'C_m' agrees\. In this equation: dV\/dt must be/);
    expect(es[0]!.fixes!.map((f) => f.title)).toEqual(["Change the unit of 'C_m' to [pF] (repairs 1 equation)", "Divide the right side by 'tau_syn'"]);
    expect(es[0]!.fixes![0]!.preferred).toBe(true);
    const fixed = analyse(applyFirst(text, es[0]!));
    expect(fixed.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    expect(fixed.model.neurons[0]!.params.find((p) => p.name === 'C_m')!.valueSI).toBeCloseTo(200e-12, 20);
  });

  it('a time constant without a unit used in two flows: one change repairs both, ranked before the one-equation fix', () => {
    const text = 'neuron A {\n  param tau = 5\n  param tau_s = 5 [ms]\n  state V [mV]\n  state I [mV]\n  dV/dt = (I - V) / tau\n  dI/dt = -I / tau + 0 * tau_s\n}\n';
    const es = errors(text);
    expect(es).toHaveLength(2);
    for (const e of es) {
      expect(e.message).toMatch(/^the unit of 'tau' looks wrong: 5 is dimensionless; as 5 \[ms\], a time, all 2 equations that use 'tau' agree\./);
      expect(e.fixes![0]!.title).toBe("Change the unit of 'tau' to [ms] (repairs 2 equations)");
    }
    expect(errors(applyFirst(text, es[0]!))).toEqual([]);
  });

  it('no unit change is claimed where none repairs every use (the equation itself is wrong)', () => {
    const text = 'neuron A {\n  param tau = 5 [ms]\n  state V [mV]\n  dV/dt = V - V / tau\n}\n';
    const es = errors(text);
    expect(es).toHaveLength(1);
    expect(es[0]!.message).toMatch(/^cannot subtract/);
  });

  it('[ns] for [nS]: the case-corrected unit, in the file\'s own units', () => {
    const text = COND('200 [pF]', '10 [ns]');
    const es = errors(text);
    expect(es).toHaveLength(1);
    expect(es[0]!.message).toMatch(/^'g_L = 10 \[ns\]' is a time: did you mean \[nS\], a conductance\? With 10 \[nS\] the equation that uses 'g_L' agrees\. In this equation: cannot add mV\*nS to ms\*mV/);
    expect(es[0]!.fixes![0]!.title).toBe("Change the unit of 'g_L' to [nS] (repairs 1 equation)");
    expect(errors(applyFirst(text, es[0]!))).toEqual([]);
  });
});

describe('syntax slips get one error and one fix', () => {
  it('param tau = 5 ms: units go in brackets', () => {
    const text = 'neuron A {\n  param tau = 5 ms\n  param r = 2 mV/ms\n  state V [mV]\n  dV/dt = r - V / tau\n}\n';
    const ds = analyse(text).diagnostics.filter((d) => d.severity !== 'hint');
    expect(ds.map((d) => [d.code, d.message, text.slice(d.range.start, d.range.end)])).toEqual([
      ['syntax-error', "a unit goes in brackets: write '5 [ms]'", 'ms'],
      ['syntax-error', "a unit goes in brackets: write '2 [mV/ms]'", 'mV/ms'],
    ]);
    let fixed = text;
    for (const d of [...ds].reverse()) fixed = applyFirst(fixed, d);
    expect(fixed).toContain('param tau = 5 [ms]\n  param r = 2 [mV/ms]\n');
    expect(analyse(fixed).diagnostics).toEqual([]);
  });

  it('a name after a number on the next line is still a name (a stray jump), not a unit', () => {
    const ds = errors('neuron A {\n  param tau = 5\n  ms := 1\n}\n');
    expect(ds.map((d) => d.code)).toEqual(['misplaced-jump']);
  });

  it('V > V_th: one error with one fix that writes the crossing', () => {
    for (const [op, dir] of [['>', 'up'], ['>=', 'up'], ['<', 'down']] as const) {
      const text = `neuron A {\n  param V_th = 1 [mV]\n  state V [mV]\n  dV/dt = -V / 1 [ms]\n  fire when V ${op} V_th { V := 0 }\n}\n`;
      const ds = analyse(text).diagnostics;
      expect(ds).toHaveLength(1);
      expect(ds[0]!.message).toBe(`a threshold is a crossing, not a comparison: write 'V crosses V_th ${dir}' (the spike fires where the left side reaches the right side while ${dir === 'up' ? 'rising' : 'falling'})`);
      expect(ds[0]!.fixes).toHaveLength(1);
      const fixed = applyFirst(text, ds[0]!);
      expect(fixed).toContain(`fire when V crosses V_th ${dir} { V := 0 }`);
      expect(analyse(fixed).diagnostics).toEqual([]);
    }
  });

  it('a missing direction names the three words once', () => {
    const ds = errors('neuron A {\n  state V\n  dV/dt = (1 - V) / 1 [ms]\n  fire when V crosses 1 { V := 0 }\n}\n');
    expect(ds).toHaveLength(1);
    expect(ds[0]!.message).toBe("expected a crossing direction: 'up', 'down' or 'either' but found '{'");
  });
});

describe('constructs of the next language version: not in the language (yet)', () => {
  const body = (line: string) => `timestep 0.1 [ms]\nneuron A {\n  param t_ref = 2 [ms]\n  param theta = 1\n  state V = 0\n  dV/dt = (2 - V) / 10 [ms] + 0 * t_ref\n  fire when V crosses theta up { V := 0 }\n${line}\n  incoming w { V := V + w }\n}\n`;
  it('refractory 2 [ms]: not a word of the language; the message says to write quiet for', () => {
    const ds = analyse(body('  refractory 2 [ms]')).diagnostics;
    expect(ds.map((d) => d.code)).toEqual(['unsupported']);
    expect(ds[0]!.message).toMatch(/^'refractory' is not in the language: a refractory period is written 'quiet for DURATION \{ dV\/dt = 0 \}'.*; this line is left out of the check$/);
  });

  for (const line of ['  quiet for t_ref { dV/dt = 0 }', '  quiet for t_ref {\n    dV/dt = 0\n  }']) {
    it(`${line.trim().split('\n')[0]}: part of the language now (v1 quiet periods), no diagnostic`, () => {
      expect(analyse(body(line)).diagnostics).toEqual([]);
    });
  }

  it('connect A -> A via w delay 1 [ms]: part of the language now (v1 receptors and delays), no diagnostic', () => {
    expect(analyse(body('') + 'connect A -> A via w delay 1 [ms]\n').diagnostics).toEqual([]);
  });

  it('the same words as names keep working: a state named quiet, a jump of it', () => {
    const text = 'neuron A {\n  state quiet = 0\n  state V = 0\n  dV/dt = -V / 1 [ms] + quiet / 1 [ms]\n  fire when V crosses 1 up { V := 0  quiet := quiet + 1 }\n}\n';
    expect(errors(text)).toEqual([]);
  });
});
