// Test helper: the finite-difference check cases for every shipped sample and for the
// synthetic models that exercise what the samples do not (time in guards and jumps, a
// non-identity incoming jump, a trainable parameter inside the incoming jump, a down
// crossing). Scenario numbers are our own (invented pump-vibration spike pattern).
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { fromMathjs } from './parseMathjs';
import type { CheckCase } from './gradientCheck';
import { modelNeuron, sampleNeuron } from './models';

/** Invented vibration-sensor spike pattern: knocks every few ms with jitter (seconds). */
export const KNOCKS = [0.0012, 0.0031, 0.0049, 0.0093, 0.0131, 0.0162, 0.0221, 0.0265, 0.0302, 0.0371];

export const MIXED = `
neuron Mixed {  #~ test-only: time in guard and jumps, non-identity incoming jump
  param tau_m = 10 [ms] trainable
  param tau_s = 4 [ms] trainable
  param tau_r = 30 [ms] trainable
  param theta = 1 trainable
  param k = 0.5 trainable
  param I_max = 8 trainable
  state V = 0
  state I = 0
  state B = 0
  dV/dt = (I - V + 0.3 * tanh(V)) / tau_m
  dI/dt = -I / tau_s
  dB/dt = -B / tau_r + 0.1 * V^2 / tau_m
  fire when V + k * B crosses theta * (1 + 0.5 * exp(-t / tau_r)) up {
    V := k * B
    B := B + 1 - exp(-t / tau_r)
  }
  incoming w {
    I := I + w * (1 - I / I_max)
    V := V + 0.05 * w
  }
}
neuron Dipper {  #~ test-only: fires on a downward crossing
  param tau_m = 10 [ms] trainable
  param tau_s = 5 [ms]
  param theta = 1 trainable
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses -theta down { V := 0 }
  incoming w { I := I + w }
}`;

export interface NamedCase { name: string; source: string; c: CheckCase }

export function fdCases(): NamedCase[] {
  const lif = sampleNeuron('lif_current.saltus', 'LifCurrent');
  const ro = sampleNeuron('lif_current.saltus', 'Readout');
  const roAlone = sampleNeuron('readout.saltus', 'Readout');
  const alif = sampleNeuron('adaptive_lif.saltus', 'AdaptiveLif');
  const adex = sampleNeuron('adex.saltus', 'AdEx');
  const izh = sampleNeuron('izhikevich.saltus', 'Izhikevich');
  const onset = sampleNeuron('delta_layer.saltus', 'Onset');
  const delta = sampleNeuron('delta_layer.saltus', 'DeltaLif');
  const roDelta = sampleNeuron('delta_layer.saltus', 'Readout');
  const balanced = sampleNeuron('receptors.saltus', 'Balanced');
  const roRec = sampleNeuron('receptors.saltus', 'Readout');
  const relay = sampleNeuron('delayed_relay.saltus', 'Relay');
  const roRelay = sampleNeuron('delayed_relay.saltus', 'Readout');
  const refr = sampleNeuron('refractory_lif.saltus', 'RefractoryLif');
  const roRefr = sampleNeuron('refractory_lif.saltus', 'Readout');
  const mixed = modelNeuron(MIXED, 'Mixed');
  const dipper = modelNeuron(MIXED, 'Dipper');
  const L = fromMathjs;
  return [
    { name: 'lif_current: LIF -> LIF -> Readout', source: 'samples/lif_current.saltus', c: {
      net: { neurons: [{ model: lif }, { model: lif }, { model: ro }], synapses: [{ from: 0, to: 1, weight: 4 }, { from: 1, to: 0, weight: 1.5 }, { from: 1, to: 2, weight: 0.8 }, { from: 0, to: 2, weight: -0.3 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 5 }, { target: 1, times: [0.006, 0.02], weight: 2.5 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 2, integrand: L('(V - 0.5)^2') }, { neuron: 0, perSpike: L('100 * (t - 0.01)^2'), integrand: L('0.1 * V^2') }] },
    } },
    { name: 'delta_layer: Onset -> DeltaLif (fires by jumps) -> Readout', source: 'samples/delta_layer.saltus', c: {
      net: { neurons: [{ model: onset }, { model: delta }, { model: delta, params: { tau_m: 0.015 } }, { model: roDelta }],
        synapses: [{ from: 0, to: 1, weight: 0.024 }, { from: 0, to: 2, weight: 0.012 }, { from: 1, to: 3, weight: 0.8 }, { from: 2, to: 3, weight: -0.5 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 5 }, { target: 2, times: [0.0035, 0.0205], weight: 0.005 }],
      duration: 0.04,
      loss: { terms: [{ neuron: 3, integrand: L('(V - 0.3)^2') }, { neuron: 2, integrand: L('1000 * (V + 0.065)^2') }] },
    } },
    { name: 'receptors: Balanced (excitatory and inhibitory blocks, one pair into both) -> Readout', source: 'samples/receptors.saltus', c: {
      net: { neurons: [{ model: balanced }, { model: balanced }, { model: roRec }],
        synapses: [{ from: 0, to: 1, weight: 4, receptor: 0 }, { from: 0, to: 1, weight: 0.5, receptor: 1 }, { from: 1, to: 0, weight: 0.9, receptor: 1 }, { from: 0, to: 2, weight: 0.7 }, { from: 1, to: 2, weight: 0.4 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 6 }, { target: 1, times: KNOCKS.slice(3), weight: 2.5, receptor: 1 }, { target: 1, times: [0.004, 0.011], weight: 5 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 2, integrand: L('(V - 0.5)^2') }, { neuron: 1, perSpike: L('30 * t^2') }] },
    } },
    { name: 'delayed_relay: Relay <-> Relay -> Readout with transmission delays', source: 'samples/delayed_relay.saltus', c: {
      net: { neurons: [{ model: relay }, { model: relay }, { model: roRelay }],
        synapses: [{ from: 0, to: 1, weight: 4, delay: 0.0005 }, { from: 1, to: 0, weight: 1.5, delay: 0.0008 }, { from: 1, to: 2, weight: 0.8, delay: 0.001 }, { from: 0, to: 2, weight: -0.3, delay: 0.001 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 5, delay: 0.0003 }, { target: 1, times: [0.006, 0.02], weight: 2.5 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 2, integrand: L('(V - 0.5)^2') }, { neuron: 0, perSpike: L('100 * (t - 0.01)^2'), integrand: L('0.1 * V^2') }] },
    } },
    { name: 'delta_layer with delays: DeltaLif fires by jumps at delayed arrivals', source: 'samples/delta_layer.saltus', c: {
      net: { neurons: [{ model: onset }, { model: delta }, { model: delta, params: { tau_m: 0.015 } }, { model: roDelta }],
        synapses: [{ from: 0, to: 1, weight: 0.024, delay: 0.0007 }, { from: 0, to: 2, weight: 0.012, delay: 0.0004 }, { from: 1, to: 3, weight: 0.8, delay: 0.0012 }, { from: 2, to: 3, weight: -0.5 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 5 }, { target: 2, times: [0.0035, 0.0205], weight: 0.005, delay: 0.0002 }],
      duration: 0.04,
      loss: { terms: [{ neuron: 3, integrand: L('(V - 0.3)^2') }, { neuron: 2, integrand: L('1000 * (V + 0.065)^2') }] },
    } },
    { name: 'refractory_lif: RefractoryLif (quiet periods) -> RefractoryLif -> Readout', source: 'samples/refractory_lif.saltus', c: {
      net: { neurons: [{ model: refr }, { model: refr, params: { t_ref: 0.002 } }, { model: roRefr }],
        synapses: [{ from: 0, to: 1, weight: 4.5 }, { from: 1, to: 2, weight: 0.8 }, { from: 0, to: 2, weight: -0.3 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 5 }, { target: 1, times: [0.006, 0.02], weight: 2.5 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 2, integrand: L('(V - 0.5)^2') }, { neuron: 0, perSpike: L('100 * (t - 0.01)^2'), integrand: L('0.1 * V^2') }] },
    } },
    { name: 'readout alone', source: 'samples/readout.saltus', c: {
      net: { neurons: [{ model: roAlone }], synapses: [] },
      inputs: [{ target: 0, times: KNOCKS, weight: 0.7 }],
      duration: 0.04,
      loss: { terms: [{ neuron: 0, integrand: L('(V - 0.4)^2 + 0.1 * I^2') }] },
    } },
    { name: 'adaptive_lif: two recurrent AdaptiveLif', source: 'samples/adaptive_lif.saltus', c: {
      net: { neurons: [{ model: alif }, { model: alif, params: { beta: 0.35 } }], synapses: [{ from: 0, to: 1, weight: 3 }, { from: 1, to: 0, weight: -1 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 6 }, { target: 1, times: [0.004, 0.017], weight: 3 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 1, integrand: L('(V - 0.3)^2 + A^2'), perSpike: L('50 * t^2') }, { neuron: 0, perSpike: L('10 * t') }] },
    } },
    { name: 'adex: AdEx -> AdEx (SI units)', source: 'samples/adex.saltus', c: {
      net: { neurons: [{ model: adex }, { model: adex }], synapses: [{ from: 0, to: 1, weight: 1.5e-9 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 2.5e-9 }],
      duration: 0.04,
      loss: { terms: [{ neuron: 1, integrand: L('1e4 * (V + 0.06)^2') }, { neuron: 0, perSpike: L('1e3 * (t - 0.01)^2') }] },
    } },
    { name: 'izhikevich: Izhikevich -> Izhikevich', source: 'samples/izhikevich.saltus', c: {
      net: { neurons: [{ model: izh }, { model: izh }], synapses: [{ from: 0, to: 1, weight: 0.02 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 0.03 }],
      duration: 0.04,
      loss: { terms: [{ neuron: 1, integrand: L('1e3 * (v + 0.06)^2') }, { neuron: 0, perSpike: L('1e3 * (t - 0.01)^2'), integrand: L('1e2 * u^2') }] },
    } },
    { name: 'Mixed: time-dependent guard and jumps, nonlinear incoming jump', source: 'tests/helpers/fdCases.ts MIXED', c: {
      net: { neurons: [{ model: mixed }, { model: mixed, params: { k: 0.3 } }], synapses: [{ from: 0, to: 1, weight: 3 }, { from: 1, to: 0, weight: 1 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: 4 }],
      duration: 0.045,
      loss: { terms: [{ neuron: 1, integrand: L('(V - 0.2)^2 + B^2'), perSpike: L('20 * t') }, { neuron: 0, integrand: L('I^2 / 100') }] },
    } },
    { name: 'Dipper: downward crossing', source: 'tests/helpers/fdCases.ts MIXED', c: {
      net: { neurons: [{ model: dipper }, { model: ro }], synapses: [{ from: 0, to: 1, weight: 1 }] },
      inputs: [{ target: 0, times: KNOCKS, weight: -5 }],
      duration: 0.04,
      loss: { terms: [{ neuron: 1, integrand: L('(V - 0.3)^2') }, { neuron: 0, perSpike: L('30 * t^2') }] },
    } },
  ];
}

/** Test-only receptor models: `Duo` (a nonlinear excitatory block with a trainable parameter
 *  in its jump, conductance-like inhibition) and the sample's `Balanced`. */
export const RECEPTORS = `
neuron Duo {  #~ test-only: two receptors, nonlinear excitatory jump, conductance-like inhibition
  param tau_m = 10 [ms] trainable
  param tau_e = 4 [ms] trainable
  param tau_i = 8 [ms] trainable
  param g_max = 6 trainable
  param E_i = -0.5 trainable
  state V = 0
  state Ie = 0
  state Ii = 0
  dV/dt = (Ie + Ii * (E_i - V) - V) / tau_m
  dIe/dt = -Ie / tau_e
  dIi/dt = -Ii / tau_i
  fire when V crosses 1 up { V := 0 }
  incoming w_exc {
    Ie := Ie + w_exc * (1 - Ie / g_max)
    V := V + 0.05 * w_exc
  }
  incoming w_inh { Ii := Ii + w_inh * (1 + 0.1 * V) }
}
` + readFileSync(join(__dirname, '..', '..', 'samples', 'receptors.saltus'), 'utf8').split('#~ non-spiking')[0]!.replace(/^timestep.*$/m, '');
