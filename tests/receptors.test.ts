// Receptors (language v1): several `incoming` blocks per neuron, told apart by their weight
// names, and `connect A -> B via W`. Resolution and diagnostics (stable codes), the derived
// per-block adjoint, and its check against finite differences of our accurate simulator
// (server/src/simulate) on a network with excitatory and inhibitory receptors.
// Scenario numbers are our own (invented pump vibration-sensor spike pattern).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseScenario, runCrossCheckSync } from '../server/src/crosscheck';
import { gridBackward, gridForward, networkFromScenario, type Network as GridNetwork } from '../server/src/grid';
import { analyse } from '../server/src/pipeline';
import { analyseIncremental } from '../server/src/incremental';
import { deriveNeuron } from '../server/src/adjoint/derive';
import { deriveEligibility } from '../server/src/eprop/derive';
import { normalise } from '../server/src/symbolic/normalise';
import { substitute } from '../server/src/symbolic/sym';
import { adjointJson } from '../server/src/adjoint/render';
import { simulate } from '../server/src/simulate';
import { toMathjs } from '../server/src/symbolic/print';
import { complete } from '../server/src/outputs/completion';
import { hover } from '../server/src/outputs/hover';
import { isRefusal, rename } from '../server/src/outputs/rename';
import { definition, references } from '../server/src/outputs/navigation';
import { formatText } from '../server/src/outputs/format';
import { semanticTokens } from '../server/src/outputs/semanticTokens';
import { gradientCheck, formatReport } from './helpers/gradientCheck';
import { fromMathjs } from './helpers/parseMathjs';
import { KNOCKS, RECEPTORS } from './helpers/fdCases';
import { modelNeuron } from './helpers/models';

const ROOT = join(__dirname, '..');
const TWO = `timestep 0.1 [ms]
neuron P {
  param tau_m = 20 [ms]
  param tau_e = 5 [ms]
  param tau_i = 10 [ms]
  state V = 0
  state Ie = 0
  state Ii = 0
  dV/dt = (Ie - Ii - V) / tau_m
  dIe/dt = -Ie / tau_e
  dIi/dt = -Ii / tau_i
  fire when V crosses 1 up { V := 0 }
  incoming w_exc { Ie := Ie + w_exc }
  incoming w_inh { Ii := Ii + w_inh }
}
`;
const diags = (text: string) => analyse(text).diagnostics.map((d) => ({ code: d.code, severity: d.severity, at: text.slice(d.range.start, d.range.end), message: d.message }));

describe('receptors: resolution and diagnostics (docs/language.md, v1 rules for the corner cases)', () => {
  it('two blocks resolve, in the order written, each with its weight', () => {
    const a = analyse(TWO + 'connect P -> P via w_exc\nconnect P -> P via w_inh\n');
    expect(a.diagnostics).toEqual([]);
    const n = a.model.neurons[0]!;
    expect(n.wellFormed).toBe(true);
    expect(n.receptors.map((r) => r.weight)).toEqual(['w_exc', 'w_inh']);
    expect(n.incoming?.weight).toBe('w_exc');
    // the same pair projected twice, into two blocks
    expect(a.model.connections.map((c) => `${c.from}->${c.to} via ${c.via}`)).toEqual(['P->P via w_exc', 'P->P via w_inh']);
  });

  it('without connect lines: one implicit self-projection per block', () => {
    expect(analyse(TWO).model.connections.map((c) => [c.via, c.implicit])).toEqual([['w_exc', true], ['w_inh', true]]);
  });

  it('via is required when the target has several blocks (missing-via, a fix per block)', () => {
    const text = TWO + 'connect P -> P\n';
    const a = analyse(text);
    expect(diags(text).map((d) => [d.code, d.severity, d.at])).toEqual([['missing-via', 'error', 'connect P -> P']]);
    expect(a.diagnostics[0]!.fixes!.map((f) => f.title)).toEqual(['Connect via w_exc', 'Connect via w_inh']);
    expect(a.model.connections).toEqual([]);
    const fixed = applyEdits(text, a.diagnostics[0]!.fixes![1]!.edits);
    expect(fixed.endsWith('connect P -> P via w_inh\n')).toBe(true);
    expect(analyse(fixed).diagnostics).toEqual([]);
  });

  it('via names an existing block, with did-you-mean', () => {
    const text = TWO + 'connect P -> P via w_in\n';
    const d = diags(text);
    expect(d.map((x) => [x.code, x.at])).toEqual([['unknown-name', 'w_in']]);
    expect(d[0]!.message).toContain("did you mean 'w_inh'?");
    expect(analyse(text).diagnostics[0]!.fixes!.map((f) => f.edits[0]!.newText)).toEqual(['w_inh']);
  });

  it('the same pair twice through the same block is an error; twice into one v0 block stays a warning', () => {
    const text = TWO + 'connect P -> P via w_inh\nconnect P -> P via w_inh\n';
    expect(diags(text).map((x) => [x.code, x.severity])).toEqual([['duplicate-declaration', 'error']]);
    const v0 = 'neuron A { state V = 0\n dV/dt = -V / 1 [ms]\n fire when V crosses 1 up { V := 0 }\n incoming w { V := V + w } }\nconnect A -> A\nconnect A -> A via w\n';
    expect(diags(v0).map((x) => [x.code, x.severity])).toEqual([['duplicate-declaration', 'warning']]);
  });

  it('via on a single block is optional and checked', () => {
    const v0 = 'neuron A { state V = 0\n dV/dt = -V / 1 [ms]\n fire when V crosses 1 up { V := 0 }\n incoming w { V := V + w } }\n';
    expect(diags(v0 + 'connect A -> A via w\n')).toEqual([]);
    expect(diags(v0 + 'connect A -> A via v\n').map((x) => x.code)).toEqual(['unknown-name']);
  });

  it('two blocks with the same weight name: duplicate-declaration on the second', () => {
    const text = TWO.replace('incoming w_inh { Ii := Ii + w_inh }', 'incoming w_exc { Ii := Ii + w_exc }');
    const d = diags(text);
    expect(d.map((x) => [x.code, x.severity, x.at])).toEqual([['duplicate-declaration', 'error', 'w_exc']]);
    expect(text.indexOf('w_exc', text.indexOf('incoming w_exc') + 5)).toBeLessThan(analyse(text).diagnostics[0]!.range.start);
  });

  it('each block infers its own weight unit', () => {
    const text = TWO.replace('state Ie = 0', 'state Ie = 0 [nA]').replace('state Ii = 0', 'state Ii = 0 [nA]').replace('dV/dt = (Ie - Ii - V) / tau_m', 'dV/dt = ((Ie - Ii) * 1 [Mohm] / 1 [mV] - V) / tau_m');
    const n = analyse(text).model.neurons[0]!;
    expect(n.wellFormed).toBe(true);
    expect(n.receptors.map((r) => r.weightDim)).toEqual([n.states[1]!.dim, n.states[2]!.dim]);
  });

  it("'delay' after 'via W' reads: one delayed receptor, one not", () => {
    const text = TWO + 'connect P -> P via w_exc delay 1 [ms]\nconnect P -> P via w_inh\n';
    expect(diags(text)).toEqual([]);
    expect(analyse(text).model.connections.map((c) => [c.via, c.delaySI])).toEqual([['w_exc', 1e-3], ['w_inh', undefined]]);
  });

  it("'via' stays a name elsewhere (v0 files keep their meaning)", () => {
    expect(diags('neuron A { param via = 2 [ms]\n state V = 0\n dV/dt = -V / via }\n').map((x) => x.code)).toEqual([]);
  });

  it('the via name is a reference to the weight (navigation, rename)', () => {
    const text = TWO + 'connect P -> P via w_inh\nconnect P -> P via w_exc\n';
    const a = analyse(text);
    const at = text.lastIndexOf('via w_inh') + 4;
    const ref = a.model.references.find((r) => r.range.start === at);
    expect(ref?.target.kind).toBe('weight');
    expect(ref?.target.name).toBe('w_inh');
  });
});

describe('receptors: the derived adjoint has one jump, weight gradient and coupling term per block', () => {
  it('for additive current synapses: lambda jumps are the identity, dL/dw_k = lambda_{I_k}+ (Wunderlich & Pehle 2021, eq. for the current synapse)', () => {
    const n = analyse(TWO).model.neurons[0]!;
    const d = deriveNeuron(n);
    expect(d.receptors.map((r) => r.weight)).toEqual(['w_exc', 'w_inh']);
    expect(d.receptors.map((r) => toMathjs(r.weightGradient))).toEqual(['lambda_Ie', 'lambda_Ii']);
    const json = adjointJson([d]).models[0]!;
    expect(json.receptors.map((r) => r.weight)).toEqual(['w_exc', 'w_inh']);
    expect(json.incoming?.weight).toBe('w_exc');
  });
});


describe('receptors: derived gradients against finite differences of the accurate simulator', () => {
  const duo = modelNeuron(RECEPTORS, 'Duo');
  const balanced = modelNeuron(RECEPTORS, 'Balanced');
  const L = fromMathjs;

  it('Duo: nonlinear excitatory block with a trainable parameter, conductance-like inhibition; one pair projected into both blocks', () => {
    const c = {
      net: { neurons: [{ model: duo }, { model: duo, params: { g_max: 5 } }],
        synapses: [{ from: 0, to: 1, weight: 3, receptor: 0 }, { from: 0, to: 1, weight: 0.8, receptor: 1 }, { from: 1, to: 0, weight: 1.2, receptor: 1 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 4.5 }, { target: 0, times: [0.0072, 0.0243], weight: 1.5, receptor: 1 }, { target: 1, times: [0.004, 0.017], weight: 3 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 1, integrand: L('(V - 0.2)^2 + Ii^2'), perSpike: L('20 * t') }, { neuron: 0, integrand: L('Ie^2 / 100') }] },
      sim: { rtol: 1e-12 },
    };
    const r = gradientCheck(c, (m) => deriveNeuron(m, { params: 'all' }), { relStep: 1e-5 });
    console.log(`Duo: ${r.spikes} spikes, ${r.rows.length} gradients, max relative error ${r.maxRelError.toExponential(2)}\n${formatReport(r)}`);
    expect(r.spikes).toBeGreaterThan(3);
    expect(r.trajectory.spikes.some((s) => s.neuron === 1)).toBe(true);
    expect(r.rows.filter((x) => x.unstable)).toEqual([]);
    expect(r.maxRelError).toBeLessThan(2e-5);
    // the inhibitory synapses matter: their gradients are not 0
    expect(Math.abs(r.gradients.weights[1]!)).toBeGreaterThan(1e-6);
    expect(Math.abs(r.gradients.inputWeights[1]!)).toBeGreaterThan(1e-6);
    // negative control: the two blocks' derivations swapped (each synapse handled by the other
    // block's jump, weight gradient and coupling) no longer agree with finite differences
    const swapped = gradientCheck(c, (m) => { const d = deriveNeuron(m, { params: 'all' }); return { ...d, receptors: [...d.receptors].reverse() }; }, { relStep: 1e-5 });
    expect(swapped.maxRelError).toBeGreaterThan(1e-2);
  });

  it('Balanced (the sample): excitatory and inhibitory current synapses', () => {
    const c = {
      net: { neurons: [{ model: balanced }, { model: balanced }],
        synapses: [{ from: 0, to: 1, weight: 4, receptor: 0 }, { from: 1, to: 0, weight: 0.9, receptor: 1 }, { from: 0, to: 1, weight: 0.5, receptor: 1 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 6 }, { target: 1, times: KNOCKS.slice(3), weight: 2.5, receptor: 1 }, { target: 1, times: [0.004, 0.011], weight: 5 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 1, integrand: L('(V - 0.3)^2'), perSpike: L('30 * t^2') }, { neuron: 0, perSpike: L('100 * (t - 0.01)^2') }] },
      sim: { rtol: 1e-12 },
    };
    const r = gradientCheck(c, (m) => deriveNeuron(m, { params: 'all' }), { relStep: 1e-5 });
    console.log(`Balanced: ${r.spikes} spikes, ${r.rows.length} gradients, max relative error ${r.maxRelError.toExponential(2)}\n${formatReport(r)}`);
    expect(r.spikes).toBeGreaterThan(3);
    expect(r.rows.filter((x) => x.unstable)).toEqual([]);
    expect(r.maxRelError).toBeLessThan(2e-5);
  });

  it('a block index the target lacks is refused with a message', () => {
    const t = simulate({ neurons: [{ model: balanced }], synapses: [] }, 0.01, [{ target: 0, times: [0.001], weight: 1, receptor: 2 }]);
    expect(t.errors).toEqual(['input 0: Balanced has no incoming block number 2']);
  });
});

describe('receptors on the grid (the semantics of every generated target) and in the cross-check', () => {
  const text = readFileSync(join(ROOT, 'samples', 'receptors.saltus'), 'utf8');
  const json = readFileSync(join(ROOT, 'samples', 'scenarios', 'receptors.json'), 'utf8');
  const analysis = analyse(text);
  const parsed = parseScenario(json, analysis);
  if (!parsed.ok) throw new Error(JSON.stringify(parsed.errors));
  const gridNet = (): GridNetwork => networkFromScenario(parsed.scenario);

  it('the sample checks clean; its scenario names the blocks and projects sensor -> hid into both', () => {
    expect(analysis.diagnostics.filter((d) => d.severity !== 'hint')).toEqual([]);
    expect(parsed.scenario.projections.map((p) => [p.from, p.to, p.via ?? null, p.receptor])).toEqual([
      ['sensor', 'hid', 'w_exc', 0], ['sensor', 'hid', 'w_inh', 1], ['hid', 'hid', 'w_inh', 1], ['hid', 'out', null, 0]]);
    expect(parsed.scenario.remarks).toEqual([]);
  });

  it('cross-check (adjoint of the accurate simulator vs its central finite differences): every row agrees', () => {
    const r = runCrossCheckSync(analysis, json, { traces: false });
    const bad = [...r.gradients, ...r.params].filter((x) => x.status !== 'ok');
    console.log(`receptors cross-check: ${r.gradients.length} weight rows, ${r.params.length} parameter rows; worst relative error ${Math.max(...[...r.gradients, ...r.params].map((x) => x.relativeError ?? 0)).toExponential(2)}; spikes ${JSON.stringify(r.spikes ?? null)}`);
    expect(bad.map((x) => `${'projection' in x ? x.projection : x.name}: ${x.status}`)).toEqual([]);
    expect(r.gradients.filter((x) => x.via === 'w_inh').length).toBe(8); // 6 from the sensor, 2 lateral (no self-synapses)
    expect(r.gradients.some((x) => x.via === 'w_inh' && Math.abs(x.adjoint) > 1e-6)).toBe(true);
  });

  it('grid gradient = central differences of the grid forward pass, and agrees with the exact gradient at dt = 0.1 ms (LTI flow: <= 1e-6)', () => {
    const net = gridNet();
    const dt = 1e-4;
    const run = gridForward(net, { dt });
    expect(run.errors).toEqual([]);
    const g = gridBackward(run);
    const spikes = (x: ReturnType<typeof gridForward>): number => x.trials.reduce((s, t) => s + Object.values(t.spikes).reduce((a, v) => a + v.length, 0), 0);
    const n0 = spikes(run);
    expect(n0).toBeGreaterThan(3);
    let worst = 0, count = 0;
    net.projections.forEach((pr, p) => pr.weights.forEach((row, i) => row.forEach((w0, j) => {
      if (pr.from === pr.to && i === j) return;
      const h = 1e-6 * Math.max(Math.abs(w0), 1e-12);
      const at = (x: number): ReturnType<typeof gridForward> => { row[j] = x; const o = gridForward(net, { dt }); row[j] = w0; return o; };
      const rs = [at(w0 + h), at(w0 - h), at(w0 + h / 2), at(w0 - h / 2)];
      if (rs.some((x) => spikes(x) !== n0)) return;
      const d1 = (rs[0]!.loss - rs[1]!.loss) / (2 * h), d2 = (rs[2]!.loss - rs[3]!.loss) / h, fd = (4 * d2 - d1) / 3;
      const floor = 3e3 * 2.2e-16 * Math.abs(run.loss) / h;
      const gap = Math.abs(g.weights[p]![i]![j]! - fd);
      count++;
      if (gap > floor) worst = Math.max(worst, gap / Math.max(Math.abs(fd), 1e-300));
    })));
    console.log(`receptors grid: ${count} weight rows vs grid central differences, worst relative gap above the rounding floor ${worst.toExponential(2)}`);
    expect(count).toBeGreaterThan(15);
    expect(worst).toBeLessThan(1e-6);
    const exact = runCrossCheckSync(analysis, json, { traces: false });
    const errs = exact.gradients.map((r) => Math.abs(g.weights[r.projection]![r.to]![r.from]! - r.adjoint) / Math.max(Math.abs(r.adjoint), 1e-300));
    console.log(`receptors grid vs exact gradient at dt = 0.1 ms: max ${Math.max(...errs).toExponential(2)}`);
    expect(Math.max(...errs)).toBeLessThan(1e-6);
  }, 120_000);

  it('a projection into a block the model lacks is refused by the grid validator', () => {
    const net = gridNet();
    net.projections[1] = { ...net.projections[1]!, receptor: 5 };
    expect(gridForward(net, { dt: 1e-4 }).errors).toEqual(['projections[1].receptor: Balanced has no incoming block number 5']);
  });

  it('scenario: via is required into several blocks, checked against the model, and a pair twice into one block is refused', () => {
    const sc = JSON.parse(json) as { projections: Record<string, unknown>[] };
    const errs = (mut: (s: typeof sc) => void): string[] => {
      const c = JSON.parse(json) as typeof sc;
      mut(c);
      const r = parseScenario(JSON.stringify(c), analysis);
      return r.ok ? [] : r.errors.map((e) => `${e.path}: ${e.message}`);
    };
    expect(errs((c) => { delete c.projections[1]!.via; })).toEqual(['projections[1]: hid (Balanced) has 2 incoming blocks (w_exc, w_inh): say which one receives this projection with "via", e.g. "via": "w_exc"']);
    expect(errs((c) => { c.projections[1]!.via = 'w_in'; })).toEqual(["projections[1].via: Balanced has no incoming block with the weight 'w_in' (its blocks: w_exc, w_inh); did you mean 'w_inh'?"]);
    expect(errs((c) => { c.projections[1]!.via = 'w_exc'; })).toEqual(['projections[1]: sensor -> hid via w_exc is already given by projections[0]; merge the two']);
    expect(errs((c) => { c.projections[3]!.via = 'w'; })).toEqual([]);
  });
});

describe('receptors in the editor: completion, hover, rename, navigation, formatting, semantic tokens', () => {
  const text = TWO + 'connect P -> P via w_inh\nconnect P -> P via w_exc\n';
  const a = analyse(text);

  it('completion offers via after connect A -> B, then the weights of B\'s blocks', () => {
    const t1 = TWO + 'connect P -> P ';
    expect(complete(analyse(t1), t1.length).map((c) => c.label)).toEqual(['via', 'delay']);
    const t4 = TWO + 'connect P -> P via w_inh ';
    expect(complete(analyse(t4), t4.length).map((c) => c.label)).toEqual(['delay']);
    const t2 = TWO + 'connect P -> P via w';
    const c2 = complete(analyse(t2), t2.length);
    expect(c2.map((c) => [c.label, c.kind])).toEqual([['w_exc', 'weight'], ['w_inh', 'weight']]);
    expect(c2[0]!.replace).toEqual({ start: t2.length - 1, end: t2.length });
    const t3 = TWO + 'connect P -> P via ';
    expect(complete(analyse(t3), t3.length).map((c) => c.label)).toEqual(['w_exc', 'w_inh']);
  });

  it('hover: the word via explains itself; the weight after it is the weight', () => {
    const at = text.indexOf('via w_inh');
    expect(hover(a, at + 1)?.markdown).toContain('Which incoming block');
    expect(hover(a, at + 5)?.markdown).toContain('w_inh');
  });

  it('rename of a weight used in via renames the block, its jump and the connection; a clash with the other block is refused', () => {
    const at = text.indexOf('w_inh {') + 1;
    const r = rename(a, at, 'w_gaba');
    if (isRefusal(r)) throw new Error(r.error);
    const out = applyEdits(text, r.edits);
    expect(out).toContain('incoming w_gaba { Ii := Ii + w_gaba }');
    expect(out).toContain('connect P -> P via w_gaba');
    expect(analyse(out).diagnostics).toEqual([]);
    // from the use in the connection too
    const r2 = rename(a, text.indexOf('via w_inh') + 5, 'w_gaba');
    if (isRefusal(r2)) throw new Error(r2.error);
    expect(applyEdits(text, r2.edits)).toBe(out);
    expect(isRefusal(rename(a, at, 'w_exc'))).toBe(true);
  });

  it('go to definition from via lands on the block\'s weight; references list the connection', () => {
    const use = text.indexOf('via w_inh') + 4;
    expect(definition(a, use + 1)).toEqual({ start: text.indexOf('w_inh {'), end: text.indexOf('w_inh {') + 5 });
    expect(references(a, text.indexOf('w_inh {') + 1, false)).toContainEqual({ start: use, end: use + 5 });
  });

  it('formatting keeps via and spaces it', () => {
    const messy = TWO + 'connect  P->P   via    w_inh\n';
    const f = formatText(messy);
    expect(f).toContain('connect P -> P via w_inh\n');
    expect(analyse(f!).model.connections.map((c) => c.via)).toEqual(['w_inh']);
  });

  it('semantic tokens: via is a keyword, the weight after it a property', () => {
    const toks = semanticTokens(a);
    const at = text.indexOf('via w_inh');
    expect(toks.find((t) => t.range.start === at)?.type).toBe('keyword');
    expect(toks.find((t) => t.range.start === at + 4)?.type).toBe('property');
  });
});

function applyEdits(text: string, edits: readonly { range: { start: number; end: number }; newText: string }[]): string {
  let out = text;
  for (const e of [...edits].sort((x, y) => y.range.start - x.range.start)) out = out.slice(0, e.range.start) + e.newText + out.slice(e.range.end);
  return out;
}

describe('receptors in e-prop (docs/eprop.md): one arrival symbol per block, an eligibility per weight', () => {
  it('Balanced: additive blocks give dx3/dw_k = z_k in the block\'s current only (Bellec et al. 2020, eq. for a current synapse: the trace of w is the filtered presynaptic arrival)', () => {
    const n = analyse(readFileSync(join(ROOT, 'samples', 'receptors.saltus'), 'utf8')).model.neurons.find((x) => x.name === 'Balanced')!;
    const d = deriveEligibility(n);
    expect(d.notDerived).toBeUndefined();
    expect(d.receptors.map((r) => [r.weight, r.arrival])).toEqual([['w_exc', 'z_pre'], ['w_inh', 'z_pre_w_inh']]);
    const q = (name: string) => d.quantities.find((x) => x.name === name)!;
    const iIe = d.states.indexOf('Ie'), iIi = d.states.indexOf('Ii');
    // the update minus M eps: with eps = 0 only the direct term is left
    const zeroEps = new Map(d.states.map((x) => [`eps_${x}`, { k: 'num', v: 0 } as const]));
    const direct = (name: string) => q(name).update.map((u) => toMathjs(normalise(substitute(u, zeroEps))));
    expect(direct('w_exc')[iIe]).toBe('z_pre');
    expect(direct('w_exc')[iIi]).toBe('0');
    expect(direct('w_inh')[iIi]).toBe('z_pre_w_inh');
    expect(direct('w_inh')[iIe]).toBe('0');
    // after one arrival at a block, only that block's current moved
    expect(toMathjs(d.receptors[1]!.next[iIi]!)).toBe('Ii + w_inh');
    expect(toMathjs(d.receptors[1]!.next[iIe]!)).toBe('Ie');
  });
});

describe('receptors and incremental analysis', () => {
  it('edits inside a receptor neuron give the same diagnostics, connections and references as a full analysis', () => {
    const base = TWO + 'neuron Q {\n  state V = 0\n  dV/dt = -V / 1 [ms]\n  fire when V crosses 1 up { V := 0 }\n  incoming w { V := V + w }\n}\nconnect Q -> P via w_inh\nconnect P -> Q\n';
    let prev = analyseIncremental(undefined, base);
    const edits: [string, string][] = [['Ii := Ii + w_inh', 'Ii := Ii + 2 * w_inh'], ['param tau_i = 10 [ms]', 'param tau_i = 12 [ms]'],
      ['incoming w_inh { Ii := Ii + 2 * w_inh }', 'incoming w_inhib { Ii := Ii + 2 * w_inhib }'], ['w_inhib {', 'w_inh {'], ['Ii + 2 * w_inhib', 'Ii + 2 * w_inh']];
    let text = base;
    for (const [from, to] of edits) {
      text = text.replace(from, to);
      prev = analyseIncremental(prev, text);
      const full = analyse(text);
      expect(prev.diagnostics, to).toEqual(full.diagnostics);
      expect(prev.model.connections.map((c) => [c.from, c.to, c.via])).toEqual(full.model.connections.map((c) => [c.from, c.to, c.via]));
      const refs = (x: typeof full): string[] => x.model.references.map((r) => `${r.range.start}-${r.range.end}:${r.target.kind} ${r.target.name}`).sort();
      expect(refs(prev)).toEqual(refs(full));
    }
    expect(prev.diagnostics).toEqual([]);
  });
});
