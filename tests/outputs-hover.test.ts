// Hover provider (server/src/outputs/hover.ts): data-driven cases with a cursor marker.
// Model values: the AdEx parameter set of Brette & Gerstner 2005 (J. Neurophysiol. 94:3637,
// Table 1; quoted from memory): C 281 pF, g_L 30 nS, E_L -70.6 mV, V_T -50.4 mV,
// Delta_T 2 mV, tau_w 144 ms, a 4 nS, b 0.0805 nA. SI prefixes: BIPM SI Brochure, 9th ed.
// 2019, Table 7 (p = 1e-12, n = 1e-9, m = 1e-3).
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { hover, type HoverSection } from '../server/src/outputs/hover';
import { KEYWORD_DOCS, FUNCTION_DOCS } from '../server/src/outputs/languageDocs';
import { KEYWORDS } from '../server/src/syntax/tokens';
import { FUNCTION_NAMES } from '../server/src/symbolic/sym';
import { cursor } from './helpers/cursor';

const ADEX = `# Adaptive exponential integrate-and-fire (AdEx), standard parameter set.
timestep 0.1 [ms]

neuron Adex {  #~ adaptive exponential LIF
  param C = 281 [pF] #~ membrane capacitance
  param g_L = 30 [nS]
  param E_L = -70.6 [mV] trainable #~ leak reversal
  param V_T = -50.4 [mV]
  param Delta_T = 2 [mV]
  param tau_w = 144 [ms]
  param a = 4 [nS]
  param b = 0.0805 [nA]
  param V_r = -70.6 [mV]
  param V_peak = 20 [mV]
  param tau_s = 5 [ms]
  state V [mV] = -70.6 [mV] #~ membrane potential
  state w [nA] = 0 [nA]
  state I [nA]
  let leak = -g_L * (V - E_L)
  let spike = g_L * Delta_T * exp((V - V_T) / Delta_T)
  let drive = leak + spike
  dV/dt = (drive - w + I) / C
  dw/dt = (a * (V - E_L) - w) / tau_w
  dI/dt = -I / tau_s
  fire when V crosses V_peak up { V := V_r  w := w + b }
  incoming q [nA] { I := I + q }
}
`;

/** ADEX with the cursor placed at the first occurrence of `before` + the rest of `marker`. */
function at(marker: string, text = ADEX): { text: string; offset: number } {
  const clean = marker.replace('‸', '');
  const i = text.indexOf(clean);
  if (i < 0) throw new Error(`'${clean}' not in the model`);
  return { text, offset: i + marker.indexOf('‸') };
}

function hoverAt(c: { text: string; offset: number }, sections?: HoverSection[]): string {
  const h = hover(analyse(c.text), c.offset, sections);
  return h?.markdown ?? '';
}

describe('hover on declarations and uses', () => {
  it('the model has no diagnostics (the fixture is valid)', () => {
    expect(analyse(ADEX).diagnostics).toEqual([]);
  });

  const cases: [string, string, string[]][] = [
    ['param declaration: kind, owner, dimension, value in pF and SI, doc', 'param ‸C = 281',
      ['param C = 281 [pF]', '**parameter** of `Adex`', 'capacitance (pF)', 'value: 281 [pF] = 2.81e-10 F', 'membrane capacitance']],
    ['trainable param, negative value in mV', 'param E_‸L', ['trainable', 'value: -70.6 [mV] = -0.0706 V', 'leak reversal']],
    ['a use of a param shows the same', '(V - E_‸L) - w', ['**parameter** of `Adex`', '-70.6 [mV]']],
    ['state: unit, initial value and its flow', 'state ‸V [mV]', ['**state** of `Adex`', 'voltage (mV)', 'initial value: -70.6 [mV] = -0.0706 V', 'flow: `dV/dt = (drive - w + I) / C`']],
    ['state without initial value starts at 0', 'state ‸I [nA]', ['initial value: 0 [nA] = 0 A']],
    ['let use: its expression and dimension', 'let drive = l‸eak', ['let leak = -g_L * (V - E_L)', '**let** of `Adex`', 'current']],
    ['let built of lets: the inlined expression', '(dri‸ve - w', ['let drive = leak + spike', 'inlined: `(-g_L * (V - E_L)) + (g_L * Delta_T * exp((V - V_T) / Delta_T))`']],
    ['incoming weight', 'incoming ‸q', ['incoming q [nA]', '**synaptic weight** of `Adex`', 'always trainable', 'current (nA)']],
    ['neuron name', 'neuron Ad‸ex', ['neuron Adex', 'states: `V`, `w`, `I`', 'fires when `V` crosses `V_peak` up', 'adaptive exponential LIF']],
  ];
  for (const [name, marker, expected] of cases) {
    it(name, () => {
      const md = hoverAt(at(marker));
      for (const e of expected) expect(md).toContain(e);
    });
  }

  it('a caret right after a name still hovers it', () => {
    expect(hoverAt(at('/ tau_w‸'))).toContain('value: 144 [ms] = 0.144 s');
  });

  it('shows the dimensions of both sides on dX/dt, and whether they agree', () => {
    const md = hoverAt(at('d‸V/dt'));
    expect(md).toContain('**flow** of state `V` of `Adex`');
    expect(md).toContain('left side `dV/dt`: voltage per time (mV/ms)');
    expect(md).toContain('right side: voltage per time (mV/ms) ✓');
    const wrong = ADEX.replace('dV/dt = (drive - w + I) / C', 'dV/dt = drive - w + I');
    const md2 = hoverAt(at('dV/d‸t', wrong));
    expect(md2).toContain('right side: current');
    expect(md2).toContain('✗');
  });

  it('explains keywords', () => {
    expect(hoverAt(at('‸fire when'))).toContain('spike');
    expect(hoverAt(at('V_peak ‸up'))).toContain('increasing');
    expect(hoverAt(at('‸incoming q'))).toContain('weight');
    expect(hoverAt(at('‸timestep'))).toContain('saltus.timestep');
  });

  it('gives the SI meaning of a unit in brackets (SI Brochure prefixes)', () => {
    expect(hoverAt(at('281 [p‸F]'))).toContain('`pF` = 1e-12 F · capacitance');
    expect(hoverAt(at('-70.6 [m‸V] trainable'))).toContain('`mV` = 0.001 V · voltage');
    const compound = `neuron N { param r = 2 [mV/ms] }`;
    const md = hoverAt(at('[mV/‸ms]', compound));
    expect(md).toContain('`mV/ms` = 1 V/s');
    expect(md).toContain('`mV` = 0.001 V; `ms` = 0.001 s');
  });

  it('gives the definition of a built-in function', () => {
    expect(hoverAt(at('Delta_T * e‸xp('))).toContain('exp(x) = e^x');
  });

  it('gives the SI value of a number with a unit', () => {
    expect(hoverAt(at('14‸4 [ms]'))).toContain('`144 [ms]` = 0.144 s');
  });

  it('is silent in comments and on punctuation', () => {
    expect(hover(analyse(ADEX), ADEX.indexOf('standard parameter'))).toBeUndefined();
    expect(hover(analyse(ADEX), ADEX.indexOf('{') + 1)).toBeUndefined();
  });

  it('has a range covering exactly the hovered name', () => {
    const c = at('(V - E_‸L) - w');
    const h = hover(analyse(c.text), c.offset)!;
    expect(c.text.slice(h.range.start, h.range.end)).toBe('E_L');
  });

  it('counts offsets in UTF-16 code units (Greek letters and an emoji before the name)', () => {
    const src = `# Δ-modulated 🐝 sensor\nneuron Bee "τ in µs 🎯" {\n  param tau = 3 [ms] "time constant τ 🐝"  # 🐝🐝 ω\n  state V = 0\n  dV/dt = -V / ta‸u  # λ 🎯\n}\n`;
    const c = cursor(src);
    const h = hover(analyse(c.text), c.offset)!;
    expect(c.text.slice(h.range.start, h.range.end)).toBe('tau');
    expect(h.markdown).toContain('time constant τ 🐝');
  });
});

describe('hover extension point (derived sections)', () => {
  it('appends each section after a rule and passes the target and neuron', () => {
    const seen: string[] = [];
    const section: HoverSection = (ctx) => {
      seen.push(`${ctx.target.kind}:${ctx.neuron?.name}`);
      return ctx.target.kind === 'symbol' ? `derived for ${ctx.target.symbol.name}` : undefined;
    };
    const md = hoverAt(at('param ‸C = 281'), [section]);
    expect(md).toMatch(/membrane capacitance\n\n---\n\nderived for C$/);
    expect(seen).toEqual(['symbol:Adex']);
  });

  it('skips a section that throws and keeps the rest', () => {
    const boom: HoverSection = () => { throw new Error('boom'); };
    const ok: HoverSection = () => 'still here';
    const md = hoverAt(at('param ‸C = 281'), [boom, ok]);
    expect(md).toContain('membrane capacitance');
    expect(md).toContain('still here');
  });
});

describe('language docs', () => {
  it('explain every keyword and every built-in function', () => {
    for (const k of KEYWORDS) expect(KEYWORD_DOCS[k], k).toBeTruthy();
    for (const f of FUNCTION_NAMES) expect(FUNCTION_DOCS[f].definition, f).toBeTruthy();
  });
});
