// Completion provider (server/src/outputs/completion.ts): what is offered where, on valid
// and on half-typed text. Unit meanings: BIPM SI Brochure, 9th ed. 2019 (prefixes, Table 7;
// derived units, Table 4).
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { complete, MODELLER_UNITS } from '../server/src/outputs/completion';
import { parseUnit, dimEqual, dimDiv, dimMul } from '../server/src/units/index';
import { cursor } from './helpers/cursor';

const TWO = `timestep 0.1 [ms]

neuron Lif {  #~ scaled LIF
  param tau_m = 20 [ms]
  param tau_s = 5 [ms]
  param theta = 1
  state V = 0
  state I = 0
  state z = 0
  let leak = -V / tau_m
  dV/dt = leak + I / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up {
    V := 0
  }
  incoming w {
    I := I + w
  }
}

neuron Other {
  param other_only = 1
  state y = 0
  dy/dt = -y / (1 [ms])
  incoming u { y := y + u }
}
`;

function labelsAt(source: string): string[] {
  const c = cursor(source);
  return complete(analyse(c.text), c.offset).map((x) => x.label);
}
/** TWO with the cursor inserted right after the first occurrence of `anchor`. */
const inTwo = (anchor: string, typed = ''): string => {
  const i = TWO.indexOf(anchor);
  if (i < 0) throw new Error(anchor);
  return TWO.slice(0, i + anchor.length) + typed + '‸' + TWO.slice(i + anchor.length);
};

describe('names in expressions', () => {
  it("offers the neuron's params, states, lets, t and the functions, not other neurons' names", () => {
    const labels = labelsAt(inTwo('dV/dt = '));
    for (const n of ['tau_m', 'tau_s', 'theta', 'V', 'I', 'z', 'leak', 't', 'exp', 'sigmoid', 'max']) expect(labels).toContain(n);
    expect(labels).not.toContain('other_only');
    expect(labels).not.toContain('w');
    expect(labels).not.toContain('param');
  });

  it('offers the weight only inside its incoming block', () => {
    expect(labelsAt(inTwo('I := I + '))).toContain('w');
    expect(labelsAt(inTwo('fire when '))).not.toContain('w');
  });

  it('offers only constants in a parameter value, and not the name being declared', () => {
    const labels = labelsAt(inTwo('param theta = '));
    expect(labels).toContain('tau_m');
    expect(labels).not.toContain('theta');
    expect(labels).not.toContain('V');
    expect(labels).not.toContain('t');
  });

  it('replaces the partly typed word', () => {
    const c = cursor(inTwo('dI/dt = -I / ta'));
    const items = complete(analyse(c.text), c.offset);
    const tau = items.find((x) => x.label === 'tau_s')!;
    expect(c.text.slice(tau.replace.start, tau.replace.end)).toBe('ta');
    expect(tau.detail).toBe('param · time (ms)');
  });

  it('works in half-typed text with syntax errors (unclosed neuron, missing right side)', () => {
    const src = `neuron Half {\n  param tau = 10 [ms]\n  state V = 0\n  dV/dt = -V / ‸`;
    expect(analyse(src.replace('‸', '')).diagnostics.some((d) => d.code === 'syntax-error')).toBe(true);
    const labels = labelsAt(src);
    expect(labels).toContain('tau');
    expect(labels).toContain('V');
  });
});

describe('keywords by position', () => {
  it('at the top level: neuron, connect, timestep', () => {
    expect(labelsAt('‸').sort()).toEqual(['connect', 'neuron', 'timestep']);
    expect(labelsAt(TWO + 'con‸').sort()).toEqual(['connect', 'neuron', 'timestep']);
  });

  it('at the start of a member: declaration keywords and dX/dt for states without one', () => {
    const labels = labelsAt(inTwo('dI/dt = -I / tau_s\n'));
    expect(labels).toEqual(expect.arrayContaining(['param', 'state', 'let', 'fire', 'incoming', 'dz/dt']));
    expect(labels).not.toContain('dV/dt');
    expect(labels).not.toContain('tau_m');
  });

  it('inside a jump block: the states (jump targets)', () => {
    expect(labelsAt(inTwo('fire when V crosses theta up {\n')).sort()).toEqual(['I', 'V', 'z']);
  });

  it('in a guard: crosses after the left side, then the directions', () => {
    expect(labelsAt('neuron N { state V = 0 param th = 1 fire when V ‸')).toEqual(['crosses']);
    expect(labelsAt('neuron N { state V = 0 param th = 1 fire when V crosses th ‸').sort()).toEqual(['down', 'either', 'up']);
  });

  it('trainable after a parameter value', () => {
    expect(labelsAt('neuron N { param a = 2 [ms] ‸')).toEqual(['trainable']);
  });

  it('nothing where a new name is declared, nor in comments or docstrings', () => {
    expect(labelsAt('neuron N { param ‸')).toEqual([]);
    expect(labelsAt('neuron N { state V = 0 # a comment ‸\n}')).toEqual([]);
    expect(labelsAt('neuron N "some ‸doc" { }')).toEqual([]);
  });
});

describe('neuron names after connect and ->', () => {
  it('lists the neurons', () => {
    expect(labelsAt(TWO + 'connect ‸').sort()).toEqual(['Lif', 'Other']);
    expect(labelsAt(TWO + 'connect Lif -> O‸').sort()).toEqual(['Lif', 'Other']);
  });
});

describe('units inside brackets', () => {
  it('offers the curated unit list after [ and replaces the typed part', () => {
    const c = cursor('neuron N { param c = 1 [p‸');
    const items = complete(analyse(c.text), c.offset);
    const labels = items.map((x) => x.label);
    for (const u of ['mV', 'ms', 'nA', 'pF', 'nS', 'MOhm', 'mM', '1/ms']) expect(labels).toContain(u);
    const pf = items.find((x) => x.label === 'pF')!;
    expect(c.text.slice(pf.replace.start, pf.replace.end)).toBe('p');
    expect(pf.detail).toBe('capacitance (F) · 1e-12 F');
  });

  it('completes the second symbol of a compound unit', () => {
    const c = cursor('neuron N { param r = 1 [mV/m‸] }');
    const items = complete(analyse(c.text), c.offset);
    const ms = items.find((x) => x.label === 'ms')!;
    expect(c.text.slice(ms.replace.start, ms.replace.end)).toBe('m');
  });

  it('every curated unit parses, with the SI meaning modellers expect', () => {
    for (const u of MODELLER_UNITS) expect(parseUnit(u).ok, u).toBe(true);
    const get = (u: string) => { const p = parseUnit(u); if (!p.ok) throw new Error(u); return p; };
    expect(get('MOhm').scale).toBeCloseTo(1e6, 6);
    expect(get('uM').scale).toBeCloseTo(1e-3, 12); // 1 uM = 1e-6 mol/L = 1e-3 mol/m^3
    expect(dimEqual(get('uF/cm^2').dim, dimDiv(get('F').dim, dimMul(get('m').dim, get('m').dim)))).toBe(true);
    expect(get('uF/cm^2').scale).toBeCloseTo(1e-2, 12); // 1e-6 F / 1e-4 m^2
    expect(dimEqual(get('Hz').dim, get('1/s').dim)).toBe(true);
  });
});
