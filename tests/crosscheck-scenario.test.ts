// Scenario validation (server/src/crosscheck/scenario.ts): every malformed, unknown or
// inconsistent field gets its own clear message naming its JSON path (table-driven), and
// no input whatever makes the check throw (fast-check property; Claessen & Hughes 2000's
// QuickCheck idea as packaged by fast-check).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import fc from 'fast-check';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario, runCrossCheckSync } from '../server/src/crosscheck';

const lifText = readFileSync(join(__dirname, '..', 'samples', 'lif_current.saltus'), 'utf8');
// The sample plus a firing neuron without an incoming block.
const MODELS = analyse(`${lifText}
neuron Pacer {  #~ fires on its own, receives nothing
  param tau = 10 [ms]
  state V = 0
  state D = 2
  dV/dt = (D - V) / tau
  fire when V crosses 1 up { V := 0 }
}`);
const MISTAKES = analyse(readFileSync(join(__dirname, '..', 'samples', 'mistakes.saltus'), 'utf8'));

const good = () => ({
  duration_s: 0.05,
  populations: {
    in: { size: 3, spikes: [[0.0012, 0], [0.0031, 2]] },
    hid: { model: 'LifCurrent', size: 2 },
    out: { model: 'Readout', size: 1 },
  },
  projections: [
    { from: 'in', to: 'hid', weights: [[1.2, 0.4, 2.0], [0.8, 1.5, 0.3]] },
    { from: 'hid', to: 'out', weights: [[0.6, -0.2]] },
  ],
  loss: { kind: 'state-integral', population: 'out', state: 'V', target: 0.5 } as Record<string, unknown>,
});
type S = ReturnType<typeof good> & Record<string, unknown>;
const edit = (f: (s: S) => void): S => { const s = good() as S; f(s); return s; };
const anyOf = (s: S) => s as unknown as Record<string, any>;

/** [what, scenario (object or JSON text), expected path, message fragment]. */
const CASES: [string, unknown, string, RegExp][] = [
  ['not JSON', '{"duration_s": 0.05,', '(file)', /not valid JSON/],
  ['a list at the root', '[1, 2]', '(root)', /must be a JSON object/],
  ['duration missing', edit((s) => { delete anyOf(s).duration_s; }), 'duration_s', /missing/],
  ['duration negative', edit((s) => { s.duration_s = -1; }), 'duration_s', /positive number of seconds/],
  ['duration too long for an accurate check', edit((s) => { s.duration_s = 1e6; }), 'duration_s', /at most 10 s/],
  ['unknown top-level field', edit((s) => { s.durations = 1; }), 'durations', /unknown field/],
  ['populations not an object', edit((s) => { anyOf(s).populations = [1]; }), 'populations', /must be an object/],
  ['population with model and spikes', edit((s) => { anyOf(s).populations.hid.spikes = []; }), 'populations.hid', /either "spikes".*or "model"/],
  ['population with neither', edit((s) => { anyOf(s).populations.hid = { size: 2 }; }), 'populations.hid', /give "model"/],
  ['unknown model name', edit((s) => { anyOf(s).populations.hid.model = 'Lif'; }), 'populations.hid.model', /no neuron named 'Lif' .*LifCurrent, Readout/],
  ['size 0', edit((s) => { anyOf(s).populations.in.size = 0; }), 'populations.in.size', /whole number >= 1/],
  ['size not whole', edit((s) => { anyOf(s).populations.hid.size = 2.5; }), 'populations.hid.size', /whole number/],
  ['size too large', edit((s) => { anyOf(s).populations.hid.size = 1000; }), 'populations.hid.size', /at most 64/],
  ['unknown population field', edit((s) => { anyOf(s).populations.hid.modle = 'x'; }), 'populations.hid.modle', /unknown field/],
  ['population name not an identifier', edit((s) => { anyOf(s).populations['two words'] = { size: 1, spikes: [] }; }), 'populations["two words"]', /identifier/],
  ['a reserved population name', '{"duration_s": 0.05, "populations": {"__proto__": {"size": 1, "spikes": []}}, "projections": [], "loss": {}}', 'populations.__proto__', /reserved/],
  ['spike not a pair', edit((s) => { anyOf(s).populations.in.spikes[1] = [0.003]; }), 'populations.in.spikes[1]', /pair \[time_s, index\]/],
  ['spike after the end', edit((s) => { anyOf(s).populations.in.spikes[0][0] = 0.07; }), 'populations.in.spikes[0][0]', /not before duration_s/],
  ['spike index out of range', edit((s) => { anyOf(s).populations.in.spikes[1][1] = 3; }), 'populations.in.spikes[1][1]', /out of range.*3 neurons/],
  ['unknown parameter', edit((s) => { anyOf(s).populations.hid.params = { tau_x: 1 }; }), 'populations.hid.params.tau_x', /LifCurrent has no parameter 'tau_x'/],
  ['parameter not a number', edit((s) => { anyOf(s).populations.hid.params = { tau_m: true }; }), 'populations.hid.params.tau_m', /finite number \(SI\) or a quantity such as "2 \[ms\]"; got true/],
  ['parameter with its unit not in brackets', edit((s) => { anyOf(s).populations.hid.params = { tau_m: '20 ms' }; }), 'populations.hid.params.tau_m', /write the unit in brackets, as in a model file: "20 \[ms\]"/],
  ['unknown initial state', edit((s) => { anyOf(s).populations.hid.initial = { U: 1 }; }), 'populations.hid.initial.U', /no state 'U'/],
  ['projections missing', edit((s) => { delete anyOf(s).projections; }), 'projections', /missing/],
  ['projections empty', edit((s) => { s.projections = []; }), 'projections', /is empty/],
  ['projection from an unknown population', edit((s) => { s.projections[0]!.from = 'sensor'; }), 'projections[0].from', /no population named 'sensor'/],
  ['projection into an input population', edit((s) => { s.projections[0]!.to = 'in'; }), 'projections[0].to', /input population: it receives no projections/],
  ['projection from a model that never fires', edit((s) => { s.projections.push({ from: 'out', to: 'hid', weights: [[1], [1]] }); }), 'projections[2].from', /Readout.*no fire block/],
  ['projection into a model without an incoming block', edit((s) => {
    anyOf(s).populations.pace = { model: 'Pacer', size: 1 };
    s.projections.push({ from: 'hid', to: 'pace', weights: [[1, 1]] });
  }), 'projections[2].to', /Pacer\) has no incoming block/],
  ['wrong number of weight rows', edit((s) => { s.projections[1]!.weights = [[0.6, -0.2], [0.1, 0.1]]; }), 'projections[1].weights', /expected 1 row \(one per neuron of out\), got 2/],
  ['wrong row length', edit((s) => { s.projections[1]!.weights = [[0.6]]; }), 'projections[1].weights[0]', /expected 2 numbers \(one per neuron of hid\), got 1/],
  ['weight not a number', edit((s) => { anyOf(s).projections[0].weights[1][2] = null; }), 'projections[0].weights[1][2]', /finite number/],
  ['self-synapse on the diagonal', edit((s) => { s.projections.push({ from: 'hid', to: 'hid', weights: [[0.5, 1], [1, 0]] }); }), 'projections[2].weights[0][0]', /cannot project onto itself.*diagonal/],
  ['the same pair twice', edit((s) => { s.projections.push({ from: 'hid', to: 'out', weights: [[1, 1]] }); }), 'projections[2]', /hid -> out is already given by projections\[1\]/],
  ['unknown projection field', edit((s) => { anyOf(s).projections[0].weight = 1; }), 'projections[0].weight', /unknown field/],
  ['loss missing', edit((s) => { delete anyOf(s).loss; }), 'loss', /missing/],
  ['unknown loss kind', edit((s) => { s.loss.kind = 'rate'; }), 'loss.kind', /"state-integral" or "spike-time"/],
  ['unknown loss state', edit((s) => { s.loss.state = 'W'; }), 'loss.state', /Readout has no state 'W' \(it has: V, I\)/],
  ['loss on an input population', edit((s) => { s.loss.population = 'in'; }), 'loss.population', /input population/],
  ['spike-time loss on a model that never fires', edit((s) => { s.loss = { kind: 'spike-time', population: 'out', targets_s: [0.01] }; }), 'loss.population', /no fire block: a spike-time loss needs a firing model/],
  ['spike-time targets of the wrong length', edit((s) => { s.loss = { kind: 'spike-time', population: 'hid', targets_s: [0.01] }; }), 'loss.targets_s', /expected 2 values \(one per neuron of hid\), got 1/],
  ['a state-integral field on a spike-time loss', edit((s) => { s.loss = { kind: 'spike-time', population: 'hid', targets_s: [0.01, 0.02], target: 1 }; }), 'loss.target', /unknown field/],
  ['state-integral target of the wrong length', edit((s) => { s.loss.target = [0.5, 0.5]; }), 'loss.target', /expected 1 value/],
];

describe('malformed scenario files', () => {
  test('the well-formed base scenario is accepted', () => {
    const r = parseScenario(good(), MODELS);
    expect(r.ok ? [] : r.errors).toEqual([]);
  });

  test.each(CASES)('%s', (_what, input, path, message) => {
    const r = parseScenario(input, MODELS, 'lif.saltus');
    expect(r.ok).toBe(false);
    if (r.ok) return;
    const hit = r.errors.find((e) => e.path === path);
    expect(hit, `errors: ${JSON.stringify(r.errors)}`).toBeDefined();
    expect(hit!.message).toMatch(message);
    // The same input through the whole check: reported, not thrown.
    const g = runCrossCheckSync(MODELS, input, { traces: false });
    expect(g.status).toBe('invalid');
    expect(g.errors.some((e) => e.path === path)).toBe(true);
  });

  test('a model with errors in its file is named as such', () => {
    const s = { ...good(), populations: { in: { size: 3, spikes: [] }, hid: { model: 'Careless', size: 2 }, out: { model: 'Careless', size: 1 } } };
    const r = parseScenario(s, MISTAKES, 'samples/mistakes.saltus');
    expect(r.ok).toBe(false);
    if (!r.ok) expect(r.errors.find((e) => e.path === 'populations.hid.model')!.message).toMatch(/Careless has errors in samples\/mistakes\.saltus/);
  });

  test('a number too large for a double is reported as written (before: "got null")', () => {
    const text = JSON.stringify(good()).replace('"weights":[[1.2', '"weights":[[1e999');
    const r = parseScenario(text, MODELS);
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.errors).toEqual([{ path: 'projections[0].weights[0][0]', message: 'must be a finite number; got 1e999 (beyond the largest double, about 1.8e308)' }]);
    const p = parseScenario(JSON.stringify(good()).replace('"size":2}', '"size":2,"params":{"tau_m":-1e999}}'), MODELS);
    expect(p.ok ? [] : p.errors.map((e) => e.message)).toEqual(['must be a finite number (SI) or a quantity such as "2 [ms]"; got -1e999 (beyond the largest double, about 1.8e308)']);
  });

  test('a rejected population is reported once, not again for each projection and the loss that use it', () => {
    const s = edit((x) => { anyOf(x).populations.out.model = 'Readuot'; anyOf(x).populations.in.size = 0; });
    const r = parseScenario(s, MODELS);
    expect(r.ok ? [] : r.errors.map((e) => e.path)).toEqual(['populations.in.size', 'populations.out.model']);
  });

  test('time constants: 0 is refused with its name, a negative one is run with a remark', () => {
    const zero = parseScenario(edit((x) => { anyOf(x).populations.hid.params = { tau_s: 0 }; }), MODELS);
    expect(zero.ok ? [] : zero.errors).toEqual([{ path: 'populations.hid.params.tau_s', message: expect.stringMatching(/^the time constant 'tau_s' is 0 \(it divides dI\/dt\): the equations are undefined there/) }]);
    const negative = parseScenario(edit((x) => { anyOf(x).populations.hid.params = { tau_s: -0.005 }; }), MODELS);
    expect(negative.ok).toBe(true);
    if (negative.ok) expect(negative.scenario.remarks).toEqual([expect.stringMatching(/^populations\.hid\.params\.tau_s: the time constant 'tau_s' is negative \(-0\.005 \(SI\)\).*becomes a growth/)]);
  });

  test('sample and scales are validated', () => {
    const bad = parseScenario(edit((x) => { x.sample = { rows: 0, seed: -2, extra: 1 }; anyOf(x).populations.hid.scales = { tau_m: -1, nope: 1 }; }), MODELS);
    expect(bad.ok ? [] : bad.errors.map((e) => e.path).sort()).toEqual(['populations.hid.scales.nope', 'populations.hid.scales.tau_m', 'sample.extra', 'sample.rows', 'sample.seed']);
    const ok = parseScenario(edit((x) => { x.sample = { rows: 3 }; anyOf(x).populations.hid.scales = { tau_m: 0.02 }; }), MODELS);
    expect(ok.ok && ok.scenario.sample).toEqual({ rows: 3 });
    const r = runCrossCheckSync(MODELS, edit((x) => { x.sample = { rows: 3, seed: 7 }; }), { traces: false });
    expect(r.sample).toEqual({ rows: 3, of: 10, seed: 7 });
    expect(r.gradients.length + r.params.length).toBe(3);
  });

  test('several problems are reported together', () => {
    const s = edit((x) => { x.duration_s = 0; anyOf(x).populations.hid.size = -1; x.loss.kind = 'nope'; });
    const r = parseScenario(s, MODELS);
    expect(r.ok ? [] : r.errors.map((e) => e.path)).toEqual(expect.arrayContaining(['duration_s', 'populations.hid.size', 'loss.kind']));
  });

  test('no JSON value makes the check throw (fast-check)', () => {
    fc.assert(fc.property(fc.jsonValue(), (v) => {
      const r = runCrossCheckSync(MODELS, v, { traces: false });
      return r.status === 'invalid' && r.errors.length > 0;
    }), { numRuns: 300 });
    // Mutations of the good scenario: any field replaced by an arbitrary value.
    const paths = ['duration_s', 'populations', 'projections', 'loss'];
    fc.assert(fc.property(fc.constantFrom(...paths), fc.jsonValue(), (k, v) => {
      // A valid duration makes a full (slow) check of the base scenario; the table covers durations.
      fc.pre(!(k === 'duration_s' && typeof v === 'number'));
      const s = good() as Record<string, unknown>;
      s[k] = v;
      const r = runCrossCheckSync(MODELS, s, { traces: false });
      return r.status === 'invalid' || r.status === 'ok';
    }), { numRuns: 200 });
  });
});
