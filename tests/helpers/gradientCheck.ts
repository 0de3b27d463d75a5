// Reusable numeric check of derived adjoint equations: simulate a short trajectory
// (server/src/simulate), run the backward pass with the derivation under test, and compare
// every gradient (synapse weights, input weights, parameters of every neuron, initial
// states, and the delays a network gives: central, one-sided at a delay of 0) with finite
// differences of the simulated loss.
// Invariants: a row is marked `unstable` (and excluded from maxRelError) when the spike
// count differs between the two perturbed runs, since the loss is then not differentiable
// across the perturbation; everything else is compared, nothing is skipped silently.
import type { ResolvedNeuron } from '../../server/src/model/types';
import type { NeuronDerivation } from '../../server/src/adjoint/derive';
import { backward, simulate, type Gradients, type InputTrain, type Loss, type Network, type SimOptions, type Trajectory } from '../../server/src/simulate';

export interface CheckCase {
  net: Network;
  inputs: InputTrain[];
  duration: number;
  loss: Loss;
  sim?: SimOptions;
}

export interface CheckRow { what: string; adjoint: number; fd: number; absError: number; relError: number; unstable: boolean }

export interface CheckReport {
  rows: CheckRow[];
  spikes: number;
  loss: number;
  /** Largest relative error over stable rows (relative to max(|fd|, |adjoint|, 1e-6 * the largest |fd|)). */
  maxRelError: number;
  trajectory: Trajectory;
  gradients: Gradients;
}

export interface CheckOptions {
  /** Relative finite-difference step (default 1e-5). */
  relStep?: number;
  /** Skip the initial-state rows. */
  skipInitial?: boolean;
}

function withParam(net: Network, i: number, name: string, value: number): Network {
  return { ...net, neurons: net.neurons.map((n, k) => (k === i ? { ...n, params: { ...n.params, [name]: value } } : n)) };
}
function withInitial(net: Network, i: number, name: string, value: number): Network {
  return { ...net, neurons: net.neurons.map((n, k) => (k === i ? { ...n, initial: { ...n.initial, [name]: value } } : n)) };
}
function withWeight(net: Network, s: number, value: number): Network {
  return { ...net, synapses: net.synapses.map((x, k) => (k === s ? { ...x, weight: value } : x)) };
}

export function gradientCheck(c: CheckCase, derivation: (m: ResolvedNeuron) => NeuronDerivation, o: CheckOptions = {}): CheckReport {
  const rel = o.relStep ?? 1e-5;
  const sim = { ...c.sim, loss: c.loss };
  const base = simulate(c.net, c.duration, c.inputs, sim);
  if (base.errors.length) throw new Error(`simulation failed: ${base.errors.join('; ')}`);
  const grads = backward(c.net, base, c.inputs, { loss: c.loss, derivation, ...(c.sim?.rtol ? { rtol: c.sim.rtol } : {}) });
  if (grads.errors.length) throw new Error(`backward pass failed: ${grads.errors.join('; ')}`);
  const rows: Omit<CheckRow, 'relError'>[] = [];
  const fd = (what: string, adjoint: number, x: number, scale: number, make: (v: number) => [Network, InputTrain[]]): void => {
    const h = rel * (Math.abs(x) > 0 ? Math.abs(x) : scale);
    const [n1, i1] = make(x + h), [n2, i2] = make(x - h);
    const a = simulate(n1, c.duration, i1, sim), b = simulate(n2, c.duration, i2, sim);
    if (a.errors.length || b.errors.length) throw new Error(`perturbed simulation failed: ${[...a.errors, ...b.errors].join('; ')}`);
    const d = (a.loss - b.loss) / (2 * h);
    rows.push({ what, adjoint, fd: d, absError: Math.abs(adjoint - d),
      unstable: a.spikes.length !== base.spikes.length || b.spikes.length !== base.spikes.length });
  };
  /** A delay: central, or one-sided (forward) at 0, where a negative delay is not a network. */
  const fdDelay = (what: string, adjoint: number, x: number, make: (v: number) => [Network, InputTrain[]]): void => {
    if (x > 0) { fd(what, adjoint, x, 1, make); return; }
    const h = rel * 1e-3;
    const [n1, i1] = make(h);
    const a = simulate(n1, c.duration, i1, sim);
    if (a.errors.length) throw new Error(`perturbed simulation failed: ${a.errors.join('; ')}`);
    const d = (a.loss - base.loss) / h;
    rows.push({ what, adjoint, fd: d, absError: Math.abs(adjoint - d), unstable: a.spikes.length !== base.spikes.length });
  };
  c.net.synapses.forEach((s, k) => {
    if (s.delay !== undefined) fdDelay(`delay[${s.from}->${s.to}]`, grads.delays[k]!, s.delay, (v) => [{ ...c.net, synapses: c.net.synapses.map((x, j) => (j === k ? { ...x, delay: v } : x)) }, c.inputs]);
  });
  c.inputs.forEach((inp, k) => {
    if (inp.delay !== undefined) fdDelay(`input ${k} delay`, grads.inputDelays[k]!, inp.delay, (v) => [c.net, c.inputs.map((x, j) => (j === k ? { ...x, delay: v } : x))]);
  });
  const wScale = Math.max(1e-12, ...c.net.synapses.map((s) => Math.abs(s.weight)), ...c.inputs.map((s) => Math.abs(s.weight)));
  c.net.synapses.forEach((s, k) => fd(`w[${s.from}->${s.to}]`, grads.weights[k]!, s.weight, wScale, (v) => [withWeight(c.net, k, v), c.inputs]));
  c.inputs.forEach((inp, k) => fd(`input ${k} weight`, grads.inputWeights[k]!, inp.weight, wScale,
    (v) => [c.net, c.inputs.map((x, j) => (j === k ? { ...x, weight: v } : x))]));
  c.net.neurons.forEach((n, i) => {
    for (const [p, g] of Object.entries(grads.params[i]!)) {
      const value = n.params?.[p] ?? n.model.params.find((q) => q.name === p)!.valueSI!;
      fd(`${n.model.name}[${i}].${p}`, g, value, 1, (v) => [withParam(c.net, i, p, v), c.inputs]);
    }
    if (o.skipInitial) return;
    n.model.states.forEach((s, j) => {
      const off = base.layout.offset[i]! + j;
      const typical = Math.max(0, ...base.events.map((e) => Math.abs(e.post[off]!)), Math.abs(base.final[off]!));
      const value = n.initial?.[s.name] ?? s.initialSI;
      fd(`${n.model.name}[${i}].${s.name}(0)`, grads.initial[off]!, value, typical > 0 ? typical : 1, (v) => [withInitial(c.net, i, s.name, v), c.inputs]);
    });
  });
  const floor = 1e-6 * Math.max(0, ...rows.map((r) => Math.abs(r.fd)));
  const full = rows.map((r) => ({ ...r, relError: r.absError / Math.max(Math.abs(r.fd), Math.abs(r.adjoint), floor, 1e-300) }));
  const maxRelError = Math.max(0, ...full.filter((r) => !r.unstable).map((r) => r.relError));
  return { rows: full, spikes: base.spikes.length, loss: base.loss, maxRelError, trajectory: base, gradients: grads };
}

/** A compact table for test logs. */
export function formatReport(r: CheckReport): string {
  return r.rows.map((x) => `${x.what.padEnd(28)} adj ${x.adjoint.toExponential(9).padStart(17)}  fd ${x.fd.toExponential(9).padStart(17)}  rel ${x.relError.toExponential(2)}${x.unstable ? ' (spike count changed)' : ''}`).join('\n');
}
