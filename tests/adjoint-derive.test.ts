// The derivation's structure and its faces: the JSON contract (docs/adjoint.md), caching by
// model content, the recorded-values list and the event-based verdict, the diagnostics
// (grazing, kinks, vanishing denominators, budget fallback), hovers and renderers.
import { describe, expect, test } from 'vitest';
import { parse } from 'mathjs';
import { analyse } from '../server/src/pipeline';
import {
  adjointDiagnostics, adjointHoverMarkdown, adjointJson, clearDerivationCache, derivationFor, deriveNeuron, modelHash,
  renderLatex, renderMarkdown, renderText,
} from '../server/src/adjoint';
import { evaluate, FUNCTION_NAMES, type Sym } from '../server/src/symbolic';
import { fromMathjs } from './helpers/parseMathjs';
import { numericallyEqual } from '../server/src/adjoint/verify';
import { neuronsOf, sampleNeuron, sampleText } from './helpers/models';

const SAMPLES = ['lif_current.saltus', 'readout.saltus', 'adaptive_lif.saltus', 'adex.saltus', 'izhikevich.saltus'];

describe('JSON contract', () => {
  for (const file of SAMPLES) {
    test(`${file}: every EXPR is mathjs text over the documented free symbols, equal to the Sym`, () => {
      const neurons = [...neuronsOf(sampleText(file)).values()];
      const json = adjointJson(neurons.map((n) => derivationFor(n)));
      expect(json.models.map((m) => m.name)).toEqual(neurons.map((n) => n.name));
      json.models.forEach((m, k) => {
        const n = neurons[k]!, d = derivationFor(n);
        expect(m.states).toEqual(n.states.map((s) => s.name));
        expect(m.spike === null).toBe(!n.fire);
        expect(m.incoming === null).toBe(!n.incoming);
        const allowed = new Set([...m.states, ...n.params.map((p) => p.name), 't', ...m.states.map((s) => `lambda_${s}`), ...m.states.map((s) => `dlV_d${s}`),
          'phi', 'coupling', 'dlp_dt', 'lV_pre', 'lV_post', ...(n.incoming ? [n.incoming.weight] : [])]);
        const pairs = (json: Record<string, string>, syms: Map<string, Sym>): [string, Sym][] => [...syms].map(([x, e]) => [json[x]!, e]);
        const exprs: [string, Sym][] = [...pairs(m.adjointFlow, d.adjointFlow)];
        if (d.spike) exprs.push([m.spike!.gdot, d.spike.gdot], [m.spike!.phi, d.spike.phi], ...pairs(m.spike!.jump, d.spike.jump));
        if (d.incoming) {
          exprs.push([m.incoming!.weightGradient, d.incoming.weightGradient], [m.incoming!.coupling, d.incoming.coupling], ...pairs(m.incoming!.jump, d.incoming.jump));
        }
        for (const [p, g] of Object.entries(m.paramGradients)) {
          exprs.push([g.flow, d.paramGradients.get(p)!.flow]);
          if (g.spike !== null) exprs.push([g.spike, d.paramGradients.get(p)!.spike!]);
          if (g.incoming !== null) exprs.push([g.incoming, d.paramGradients.get(p)!.incoming!]);
        }
        for (const [text, s] of exprs) {
          const node = parse(text);
          const names = node.filter((x) => x.type === 'SymbolNode').map((x) => (x as unknown as { name: string }).name)
            .filter((x) => !(FUNCTION_NAMES as readonly string[]).includes(x));
          for (const name of names) expect(allowed.has(name), `${name} in ${text}`).toBe(true);
          const scope: Record<string, number> = Object.fromEntries([...allowed].map((x, i) => [x, 0.3 + 0.1 * (i % 7)]));
          const viaMathjs = node.compile().evaluate({ ...scope }) as number;
          expect(viaMathjs).toBeCloseTo(evaluate(s, scope), 6);
        }
        expect(JSON.parse(JSON.stringify(json))).toEqual(json);
      });
    });
  }
  test('the LIF entry reads as docs/adjoint.md shows it', () => {
    const m = adjointJson([derivationFor(sampleNeuron('lif_current.saltus', 'LifCurrent'))]).models[0]!;
    expect(m.adjointFlow).toEqual({ V: 'lambda_V / tau_m - dlV_dV', I: 'lambda_I / tau_s - dlV_dI - lambda_V / tau_m' });
    expect(m.spike!.gdot).toBe('(I - theta) / tau_m');
    expect(m.spike!.jump).toEqual({ V: 'phi', I: 'lambda_I' });
    expect(m.spike!.record).toEqual(['I']);
    expect(m.incoming).toMatchObject({ weight: 'w', weightGradient: 'lambda_I', jump: { V: 'lambda_V', I: 'lambda_I' } });
    expect(numericallyEqual(fromMathjs(m.incoming!.coupling), fromMathjs('w * (lambda_V / tau_m - lambda_I / tau_s)'), 6)).toBe('equal');
    expect(Object.keys(m.paramGradients)).toEqual(['tau_m', 'tau_s']);
  });
});

describe('verdicts and recorded values', () => {
  test('linear flows are event-based; AdEx and Izhikevich need the trajectory of their voltage', () => {
    const lif = derivationFor(sampleNeuron('lif_current.saltus', 'LifCurrent'));
    expect(lif.trajectory).toMatchObject({ eventBased: true, adjointStates: [] });
    expect(derivationFor(sampleNeuron('adaptive_lif.saltus', 'AdaptiveLif')).spike).toMatchObject({ eventBased: true, record: ['V', 'I', 'A'] });
    const adex = derivationFor(sampleNeuron('adex.saltus', 'AdEx'));
    expect(adex.trajectory).toMatchObject({ eventBased: false, adjointStates: ['V'], bytesPerStep: 8 });
    expect(adex.spike!.eventBased).toBe(false);
    expect(derivationFor(sampleNeuron('izhikevich.saltus', 'Izhikevich')).trajectory.adjointStates).toEqual(['v']);
  });
});

describe('cache keyed by model content', () => {
  test('comments and spacing do not change the hash; a changed flow does', () => {
    const base = sampleText('lif_current.saltus');
    const a = neuronsOf(base).get('LifCurrent')!;
    const b = neuronsOf('# another comment\n\n' + base.replace('dV/dt = (I - V) / tau_m', 'dV/dt   =   (I - V)/tau_m')).get('LifCurrent')!;
    const c = neuronsOf(base.replace('dV/dt = (I - V) / tau_m', 'dV/dt = (2 * I - V) / tau_m')).get('LifCurrent')!;
    expect(modelHash(b)).toBe(modelHash(a));
    expect(modelHash(c)).not.toBe(modelHash(a));
    clearDerivationCache();
    const first = derivationFor(a);
    expect(derivationFor(b)).toBe(first);
    expect(derivationFor(c)).not.toBe(first);
  });
});

const KINKS = `neuron Kinky {
  param tau = 10 [ms]
  param theta = 1
  state V = 0
  state I = 0
  dV/dt = (I - abs(V)) / tau
  dI/dt = -I / tau + log(1 + I^2) / (tau * (2 + V))
  fire when V crosses theta up { V := 0 }
  incoming w { I := I + max(w, 0) }
}`;

describe('diagnostics', () => {
  test('grazing crossing of the LIF: when I = theta (range on the fire condition)', () => {
    const text = sampleText('lif_current.saltus');
    const a = analyse(text), n = a.model.neurons.find((x) => x.name === 'LifCurrent')!;
    const ds = adjointDiagnostics(derivationFor(n), n);
    const g = ds.find((x) => x.code === 'grazing-crossing')!;
    // Information, not a warning: every threshold model has a grazing set (the cross-check warns where a run reaches it).
    expect(g.severity).toBe('info');
    expect(g.message).toContain('the crossing is not transversal when I = theta: a spike there has no time derivative');
    expect(text.slice(g.range.start, g.range.end)).toBe('fire when V crosses theta up');
  });
  test('kinks and vanishing denominators are placed inside their equations', () => {
    const a = analyse(KINKS), n = a.model.neurons[0]!;
    const ds = adjointDiagnostics(deriveNeuron(n), n);
    const kink = ds.filter((x) => x.code === 'non-smooth');
    expect(kink.map((x) => KINKS.slice(x.range.start, x.range.end)).sort()).toEqual(['abs(V)', 'max(w, 0)']);
    expect(kink.every((x) => x.severity === 'warning')).toBe(true);
    expect(kink.find((x) => x.message.includes('dV/dt'))!.message).toContain('V = 0');
    const den = ds.filter((x) => x.code === 'vanishing-denominator');
    expect(den).toHaveLength(1);
    expect(den[0]!.severity).toBe('info');
    expect(den[0]!.message).toContain('V + 2 = 0');
    expect(KINKS.slice(den[0]!.range.start, den[0]!.range.end)).toMatch(/^dI\/dt = /);
  });
  test('a tiny budget falls back to unsimplified forms, says so, and stays exact', () => {
    const n = sampleNeuron('adex.saltus', 'AdEx');
    const small = deriveNeuron(n, { budget: { maxNodes: 8 } }), full = deriveNeuron(n);
    expect(small.notes.some((x) => x.includes('exceed the budget of 8'))).toBe(true);
    expect(small.issues.some((x) => x.code === 'derivation-budget')).toBe(true);
    expect(adjointDiagnostics(small, n).some((x) => x.code === 'derivation-budget' && x.severity === 'info')).toBe(true);
    for (const x of ['V', 'w', 'I']) {
      expect(numericallyEqual(small.adjointFlow.get(x)!, full.adjointFlow.get(x)!, 6)).toBe('equal');
      expect(numericallyEqual(small.spike!.jump.get(x)!, full.spike!.jump.get(x)!, 6)).toBe('equal');
    }
  });
  test('a model with errors derives nothing, says so, and does not throw', () => {
    const a = analyse(sampleText('mistakes.saltus'));
    for (const n of a.model.neurons) {
      const d = deriveNeuron(n);
      expect(d.wellFormed).toBe(false);
      expect(d.notes[0]).toContain('has errors');
      expect(adjointDiagnostics(d, n)).toEqual([]);
      expect(adjointHoverMarkdown(d, { kind: 'fire' })).toContain('not derived');
    }
  });
});

describe('hover and renderers', () => {
  const d = derivationFor(sampleNeuron('lif_current.saltus', 'LifCurrent'));
  test('hover per construct', () => {
    const v = adjointHoverMarkdown(d, { kind: 'state', name: 'V' });
    expect(v).toContain('`dlambda_V/dt` = `lambda_V / tau_m - dlV_dV`');
    expect(v).toContain('at a spike: `lambda_V` before = `phi`');
    const f = adjointHoverMarkdown(d, { kind: 'fire' });
    expect(f).toContain('`gdot` = `(I - theta) / tau_m`');
    expect(f).toContain('not transversal when I = theta');
    expect(adjointHoverMarkdown(d, { kind: 'incoming' })).toContain('`dL/dw` += `lambda_I`');
    expect(adjointHoverMarkdown(d, { kind: 'state', name: 'Q' })).toContain('not a state');
    const ro = derivationFor(sampleNeuron('readout.saltus', 'Readout'));
    expect(adjointHoverMarkdown(ro, { kind: 'fire' })).toContain('no fire block');
  });
  test('text, markdown and LaTeX carry every formula', () => {
    const t = renderText(d);
    expect(t).toContain('dlambda_I/dt = lambda_I / tau_s - dlV_dI - lambda_V / tau_m');
    expect(t).toContain('phi = (tau_m * (coupling - dlp_dt + lV_post - lV_pre) + I * lambda_V) / (I - theta)');
    expect(t).toContain('dL/dtau_m = integral of');
    expect(renderMarkdown(d)).toContain('**At a received spike**');
    const l = renderLatex(d);
    expect(l.startsWith('\\begin{aligned}')).toBe(true);
    expect(l).toContain('\\lambda_{V}');
  });
  // The derivation time per sample neuron is measured by `npm run bench` (bench/derive.mjs,
  // P2: warm and cold, with the goal < 200 ms warm); here only a generous hang guard.
  test('every sample neuron derives again to the same result (hang guard 30 s)', () => {
    for (const file of SAMPLES) {
      for (const n of neuronsOf(sampleText(file)).values()) {
        expect(renderText(deriveNeuron(n)), `${file} ${n.name}`).toBe(renderText(deriveNeuron(n)));
      }
    }
  }, 30_000);
});

describe('robustness', () => {
  test('damaged sample texts never make the derivation, diagnostics, JSON or hovers throw', () => {
    let derived = 0;
    for (const file of [...SAMPLES, 'mistakes.saltus']) {
      const text = sampleText(file);
      let seed = 12345 + file.length;
      const next = () => ((seed = (seed * 1103515245 + 12345) % 2147483648) / 2147483648);
      for (let k = 0; k < 25; k++) {
        const at = Math.floor(next() * text.length), len = 1 + Math.floor(next() * 12);
        const a = analyse(text.slice(0, at) + text.slice(at + len));
        for (const n of a.model.neurons) {
          const d = deriveNeuron(n);
          if (d.wellFormed) derived++;
          adjointDiagnostics(d, n);
          JSON.stringify(adjointJson([d]));
          for (const item of [{ kind: 'fire' }, { kind: 'incoming' }, ...n.states.map((s) => ({ kind: 'state' as const, name: s.name }))] as const) adjointHoverMarkdown(d, item);
          renderText(d); renderMarkdown(d); renderLatex(d);
        }
      }
    }
    expect(derived).toBeGreaterThan(10);
  });
});
