// e-prop on network descriptions (docs/eprop.md, "Networks"): `run.py NET.json --rule eprop` of
// the generated NumPy and PyTorch code on the lif_current sample's network (sensor inputs, a
// LifCurrent hidden layer with or without recurrence, a Readout population under the
// state-integral loss). Without recurrence, e-prop with the exact learning signal equals
// backpropagation through time of the same discrete network in PyTorch autograd (an independent
// library; tests/helpers/eprop_net_bptt.py, float64, to 1e-10); with recurrence the test reports
// how far e-prop's approximation is. The torch package prints the NumPy figures (to 1e-12); the
// same scenario trains by e-prop (the loss falls); other losses and readouts are refused clearly.
import { describe, expect, it } from 'vitest';
import { mkdirSync, mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { runCli, root } from './helpers/cli';
import { analyse } from '../server/src/pipeline';
import { spawnSync } from 'node:child_process';

const python = numpyPython();
const torch = torchPython();
const base = mkdtempSync(join(tmpdir(), 'saltus-eprop-net-'));
const scenario = JSON.parse(readFileSync(join(root, 'samples', 'scenarios', 'lif_current.json'), 'utf8')) as {
  populations: Record<string, { size: number; spikes?: number[][] }>; projections: { from: string; to: string; weights: number[][] }[]; [k: string]: unknown };

function generate(target: string): string {
  const out = join(base, target);
  mkdirSync(out, { recursive: true });
  const r = runCli(['generate', 'samples/lif_current.saltus', '--target', target, '--out', out, '--network', 'samples/scenarios/lif_current.json', '--force']);
  expect(r.code, r.stderr).toBe(0);
  return out;
}

/** The sample's network with a denser made-up sensor train; `recurrent` keeps the hid -> hid projection. */
function network(recurrent: boolean): Record<string, unknown> {
  const spikes: number[][] = [];
  for (let k = 0; k < 40; k++) spikes.push([0.0007 + k * 0.00117, k % 3]);
  return {
    ...scenario,
    populations: { ...scenario.populations, sensor: { size: 3, spikes } },
    projections: scenario.projections.filter((p) => recurrent || !(p.from === 'hid' && p.to === 'hid')),
  };
}

interface Report { rule?: string; loss: number; weights: number[][][]; params: Record<string, number>; spikes: Record<string, number[][]>; kept_bytes?: number; losses?: number[] }

function eprop(py: string, dir: string, net: unknown, extra: string[] = []): Report {
  writeFileSync(join(dir, 'net.json'), JSON.stringify(net));
  return JSON.parse(runPython(py, ['run.py', 'net.json', '--dt', '0.1ms', '--rule', 'eprop', '--format', 'json', ...extra], dir)) as Report;
}

function bptt(net: unknown): Report & { spikes: number } {
  const model = analyse(readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8')).model;
  const vals = (name: string): Record<string, number> => Object.fromEntries(model.neurons.find((n) => n.name === name)!.params.map((p) => [p.name, p.valueSI!]));
  return JSON.parse(runPython(torch!, [join(__dirname, 'helpers', 'eprop_net_bptt.py')], root,
    JSON.stringify({ net, dt: 1e-4, params: vals('LifCurrent'), readout: vals('Readout') }))) as Report & { spikes: number };
}

const rel = (a: number[], b: number[]): number => Math.max(...a.map((v, i) => Math.abs(v - b[i]!))) / Math.max(...b.map(Math.abs));

describe('e-prop on a network description (run.py --rule eprop)', () => {
  it.skipIf(!python || !torch)('without recurrence it equals BPTT of the same discrete network in PyTorch autograd (float64) to 1e-10', () => {
    const np = generate('numpy');
    const net = network(false);
    const got = eprop(python!, np, net);
    // source: backpropagation through time by PyTorch autograd (tests/helpers/eprop_net_bptt.py)
    const want = bptt(net);
    const spikes = got.spikes.hid!.length;
    expect(spikes).toBe(want.spikes);
    expect(spikes).toBeGreaterThan(10);
    expect(got.rule).toBe('eprop');
    expect(Math.abs(got.loss - want.loss) / want.loss).toBeLessThan(1e-12);
    const rw = got.weights.map((w, j) => rel(w.flat(), want.weights[j]!.flat()));
    const rp = Object.keys(want.params).map((k) => Math.abs(got.params[k]! - want.params[k]!) / Math.abs(want.params[k]!));
    console.log(`network e-prop vs autograd BPTT (no recurrence): ${spikes} spikes, max rel. difference per projection ${rw.map((r) => r.toExponential(2)).join(', ')}, tau_m/tau_s ${rp.map((r) => r.toExponential(2)).join(', ')}`);
    for (const r of [...rw, ...rp]) expect(r).toBeLessThan(1e-10);
  }, 240_000);

  it.skipIf(!python || !torch)('with recurrence: the readout projection stays exact; the report says how far the hidden gradients are', () => {
    const np = generate('numpy');
    const net = network(true);
    const got = eprop(python!, np, net);
    const want = bptt(net);
    expect(got.spikes.hid!.length).toBe(want.spikes);
    const rw = got.weights.map((w, j) => rel(w.flat(), want.weights[j]!.flat()));
    console.log(`network e-prop vs autograd BPTT (recurrent hid -> hid, left out by e-prop by design): max rel. difference per projection ${rw.map((r) => r.toExponential(2)).join(', ')} (sensor->hid, hid->hid, hid->out)`);
    // the readout never fires, so nothing recurrent lies between its weights and the loss: exact
    expect(rw[2]).toBeLessThan(1e-10);
    expect(rw.every(Number.isFinite)).toBe(true);
  }, 240_000);

  it.skipIf(!python || !torch)('the PyTorch package prints the NumPy figures (to 1e-12), with random feedback too', () => {
    const np = generate('numpy');
    const th = generate('torch');
    for (const fb of ['exact', 'random']) {
      const a = eprop(python!, np, network(true), ['--feedback', fb]);
      const b = eprop(torch!, th, network(true), ['--feedback', fb]);
      expect(b.spikes).toEqual(a.spikes);
      expect(Math.abs(b.loss - a.loss) / a.loss).toBeLessThan(1e-12);
      a.weights.forEach((w, j) => expect(rel(b.weights[j]!.flat(), w.flat())).toBeLessThan(1e-12));
      for (const k of Object.keys(a.params)) expect(Math.abs(b.params[k]! - a.params[k]!) / Math.abs(a.params[k]!)).toBeLessThan(1e-12);
      expect(b.kept_bytes).toBe(a.kept_bytes);
    }
  }, 240_000);

  it.skipIf(!python)('the same scenario trains by e-prop: the loss falls over epochs (exact and random feedback)', () => {
    const np = generate('numpy');
    for (const fb of ['exact', 'random']) {
      const out = eprop(python!, np, network(true), ['--feedback', fb, '--epochs', '8', '--lr', '1']);
      const l = out.losses!;
      console.log(`network e-prop training (${fb} feedback): losses ${l.map((v) => v.toExponential(3)).join(' ')}`);
      expect(l).toHaveLength(8);
      expect(l.every(Number.isFinite)).toBe(true);
      expect(l.at(-1)!).toBeLessThan(0.5 * l[0]!);
    }
  }, 240_000);

  it.skipIf(!python)('refuses clearly: a loss other than state-integral, a readout that fires', () => {
    const np = generate('numpy');
    const run = (net: unknown): { code: number | null; stderr: string } => {
      writeFileSync(join(np, 'bad.json'), JSON.stringify(net));
      const r = spawnSync(python!, ['run.py', 'bad.json', '--dt', '0.1ms', '--rule', 'eprop'], { cwd: np, encoding: 'utf8' });
      return { code: r.status, stderr: r.stderr };
    };
    let r = run({ ...network(false), loss: { kind: 'spike-time', population: 'hid', target: [0.01, 0.02] } });
    expect(r.code).not.toBe(0);
    expect(r.stderr).toMatch(/bad\.json: loss\.kind: e-prop on a network takes the state-integral loss/);
    r = run({ ...network(false), loss: { kind: 'state-integral', population: 'hid', state: 'V', target: 0.5 } });
    expect(r.code).not.toBe(0);
    expect(r.stderr).toMatch(/loss\.population hid: e-prop's learning signal needs a readout that never fires/);
  }, 120_000);
});
