// The readable form of derived formulas (symbolic/readable.ts) and where it is shown: grouped
// terms, symbolic constants kept symbolic, the legend of derived names in the CLI text, what
// is recorded at received spikes. The value check is independent of our printer: the text is
// read back by mathjs's parser (tests/helpers/parseMathjs.ts) and evaluated against the
// canonical form at random points.
import { describe, expect, test } from 'vitest';
import { analyse, derivedDiagnostics } from '../server/src/pipeline';
import { adjointJson, adjointHoverMarkdown, derivationFor, renderLatex, renderMarkdown, renderText } from '../server/src/adjoint';
import type { NeuronDerivation } from '../server/src/adjoint';
import { evaluate, freeSymbols, normalise, type Sym } from '../server/src/symbolic';
import { toMathjs } from '../server/src/symbolic/print';
import { readable, readableText } from '../server/src/symbolic/readable';
import { previewModel } from '../server/src/adjoint/preview';
import { fromMathjs } from './helpers/parseMathjs';
import { modelNeuron, neuronsOf, sampleNeuron, sampleText } from './helpers/models';

// A conductance-based LIF (textbook form, e.g. Gerstner et al. 2014, Neuronal Dynamics,
// eq. 3.2 with a conductance synapse; written here from memory).
const COND = `neuron CondLif {
  param C_m = 200 [pF]
  param g_L = 10 [nS]
  param E_L = -70 [mV]
  param E_exc = 0 [mV]
  param V_th = -50 [mV]
  param tau_g = 5 [ms] trainable
  state V = -70 [mV]
  state g [nS]
  dV/dt = (g_L * (E_L - V) + g * (E_exc - V)) / C_m
  dg/dt = -g / tau_g
  fire when V crosses V_th up {
    V := E_L
  }
  incoming w [nS] {
    g := g + w
  }
}
`;

const SAMPLES = ['lif_current.saltus', 'readout.saltus', 'adaptive_lif.saltus', 'adex.saltus', 'izhikevich.saltus'];

function formulas(d: NeuronDerivation): Sym[] {
  const out: Sym[] = [...d.adjointFlow.values()];
  if (d.spike) out.push(d.spike.gdot, d.spike.phi, ...d.spike.jump.values());
  if (d.incoming) out.push(...d.incoming.jump.values(), d.incoming.weightGradient, d.incoming.coupling);
  for (const g of d.paramGradients.values()) out.push(...[g.flow, g.spike, g.incoming].filter((x): x is Sym => !!x));
  return out;
}

/** A seeded generator (mulberry32), so a failure repeats. */
function rng(seed: number): () => number {
  let a = seed;
  return () => {
    a = (a + 0x6d2b79f5) | 0;
    let t = Math.imul(a ^ (a >>> 15), 1 | a);
    t = (t + Math.imul(t ^ (t >>> 7), 61 | t)) ^ t;
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

const allDerivations = (): NeuronDerivation[] => [
  ...SAMPLES.flatMap((f) => [...neuronsOf(sampleText(f)).values()].map((n) => derivationFor(n))),
  derivationFor(modelNeuron(COND, 'CondLif')),
];

describe('the readable form has the value of the canonical form', () => {
  test('every formula of every sample, read back by mathjs, at random points', () => {
    const r = rng(17);
    let checked = 0;
    for (const d of allDerivations()) for (const s of formulas(d)) {
      const back = fromMathjs(readableText(s));
      for (let k = 0; k < 3; k++) {
        const env: Record<string, number> = {};
        for (const n of freeSymbols(s)) env[n] = 0.5 + r(); // positive, away from 0: no log/sqrt domain trouble
        const a = evaluate(s, env), b = evaluate(back, env);
        if (!Number.isFinite(a)) continue;
        expect(Math.abs(a - b)).toBeLessThanOrEqual(1e-9 * Math.max(1, Math.abs(a)));
        checked++;
      }
    }
    expect(checked).toBeGreaterThan(100);
  });
  test('the JSON contract keeps the canonical text', () => {
    const d = derivationFor(modelNeuron(COND, 'CondLif'));
    const m = adjointJson([d]).models[0]!;
    expect(m.spike!.phi).toBe(toMathjs(d.spike!.phi));
    expect(m.adjointFlow['V']).toBe(toMathjs(d.adjointFlow.get('V')!));
  });
});

describe('grouped for reading', () => {
  const d = derivationFor(modelNeuron(COND, 'CondLif'));
  const t = renderText(d);
  test('common factors of a sum come out: (g + g_L) lambda_V / C_m', () => {
    expect(t).toContain('dlambda_V/dt = lambda_V * (g + g_L) / C_m - dlV_dV');
  });
  test('a coupling term factors the weight and the state difference', () => {
    expect(t).toContain('coupling term (summed into the sender\'s coupling) = w * (lambda_V * (E_exc - V) / C_m - lambda_g / tau_g)');
  });
  test('no product of a factor with a sum it cancels in (no C_m * (... / C_m))', () => {
    for (const dd of allDerivations()) {
      const txt = renderText(dd);
      for (const m of txt.matchAll(/\b(\w+) \* \(/g)) {
        // the bracket the factor multiplies must not divide by the same factor at its own level
        let depth = 0, i = m.index! + m[0].length, inner = '';
        for (; i < txt.length; i++) {
          const c = txt[i]!;
          if (c === '(') depth++;
          if (c === ')') { if (depth === 0) break; depth--; }
          inner += depth === 0 ? c : '';
        }
        expect(inner, `${dd.name}: ${m[1]} * (...)`).not.toMatch(new RegExp(`/ ${m[1]}\\b`));
      }
    }
    expect(renderText(derivationFor(sampleNeuron('lif_current.saltus', 'LifCurrent'))))
      .toContain('phi = (tau_m * (coupling - dlp_dt + lV_post - lV_pre) + I * lambda_V) / (I - theta)');
  });
  test('a sum of negative terms takes out the sign; a single term and numbers are left alone', () => {
    const r = (text: string): string => readableText(normalise(fromMathjs(text)));
    expect(r('-a*x - a*y')).toBe('-a * (x + y)');
    expect(r('x')).toBe('x');
    expect(r('3')).toBe('3');
    expect(r('2*x + 2*y')).toBe('2 * x + 2 * y'); // numbers are not factors (readable.ts)
    expect(r('x + y')).toBe('x + y');
    expect(toMathjs(readable(normalise(fromMathjs('C * (a + b / C)'))))).toBe('b + C * a');
  });
});

describe('symbolic constants stay symbolic (AdEx cut-off V_T + 5 Delta_T gives e^5)', () => {
  const n = sampleNeuron('adex.saltus', 'AdEx');
  const d = derivationFor(n);
  const numberOfE5 = /148\.41/;
  test('guard slope in text, Markdown, LaTeX and the preview page', () => {
    const t = renderText(d);
    expect(t).toMatch(/gdot = .*exp\(5\)/);
    expect(t).not.toMatch(numberOfE5);
    expect(renderMarkdown(d)).not.toMatch(numberOfE5);
    expect(renderLatex(d)).toMatch(/\\exp\\left\(5\\right\)|e\^\{5\}/);
    expect(JSON.stringify(previewModel(d))).not.toMatch(numberOfE5);
  });
  test('grazing message and hover', () => {
    const a = analyse(sampleText('adex.saltus'));
    const grazing = derivedDiagnostics(a).filter((x) => x.code === 'grazing-crossing');
    expect(grazing.length).toBe(1);
    expect(grazing[0]!.message).toContain('exp(5)');
    expect(grazing[0]!.message).not.toMatch(numberOfE5);
    const h = adjointHoverMarkdown(d, { kind: 'fire' });
    expect(h).toContain('exp(5)');
    expect(h).not.toMatch(numberOfE5);
  });
});

describe('the CLI text explains its derived names', () => {
  test('a legend lists exactly the derived names the text uses', () => {
    const lif = renderText(derivationFor(sampleNeuron('lif_current.saltus', 'LifCurrent')));
    const legend = lif.slice(lif.indexOf('Symbols:'));
    for (const w of ['lambda_X', 'dlV_dX', 'dlp_dt', 'lV_pre/post', 'coupling', 'phi', 'gdot']) expect(legend).toContain(w);
    const ro = renderText(derivationFor(sampleNeuron('readout.saltus', 'Readout')));
    const roLegend = ro.slice(ro.indexOf('Symbols:'));
    expect(roLegend).toContain('dlV_dX');
    expect(roLegend).not.toContain('dlp_dt'); // the readout has no spikes
    expect(roLegend).not.toContain('gdot');
  });
});

describe('what is recorded at received spikes', () => {
  const d = derivationFor(modelNeuron(COND, 'CondLif'));
  test('the conductance model records V at each arrival (the coupling term holds E_exc - V)', () => {
    expect(d.incoming!.record).toEqual(['V']);
    expect(renderText(d)).toContain('record at each received spike: V');
    expect(renderMarkdown(d)).toContain('record at each received spike: `V`');
    expect(adjointHoverMarkdown(d, { kind: 'incoming' })).toContain('record at each received spike: `V`');
    const sec = previewModel(d).sections.find((s) => s.title.startsWith('At a received spike'))!;
    expect(sec.note).toContain('Record at each received spike: V.');
  });
  test('a current synapse records nothing but the time', () => {
    const lif = derivationFor(sampleNeuron('lif_current.saltus', 'LifCurrent'));
    expect(renderText(lif)).toContain('record at each received spike: (nothing but the time)');
  });
});
