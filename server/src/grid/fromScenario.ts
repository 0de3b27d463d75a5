// A cross-check scenario (one trial, a state-integral or spike-time loss) as a grid network.
import type { Scenario } from '../crosscheck/scenario';
import type { Network } from './network';

export function networkFromScenario(s: Scenario): Network {
  const inputs: Record<string, [number, number][]> = {};
  for (const p of s.populations) if (p.kind === 'input') inputs[p.name] = p.spikes.map(([t, i]) => [t, i]);
  return {
    duration: s.duration,
    populations: s.populations.map((p) => (p.kind === 'input' ? { kind: 'input', name: p.name, size: p.size }
      : { kind: 'model', name: p.name, size: p.size, model: p.model, params: p.params, initial: p.initial })),
    projections: s.projections.map((p) => ({ from: p.from, to: p.to, ...(p.receptor ? { receptor: p.receptor } : {}), weights: p.weights.map((r) => [...r]),
      ...(p.delays ? { delays: p.delays.map((r) => [...r]) } : {}) })),
    trials: [{ inputs }],
    loss: s.loss.kind === 'state-integral'
      ? { kind: 'state-integral', population: s.loss.population, state: s.loss.state, target: [...s.loss.target] }
      : { kind: 'spike-time', population: s.loss.population, targets: [...s.loss.targets] },
  };
}
