// Test helper: resolved neurons from the shipped samples or from model text, through the
// real pipeline (`analyse`), failing loudly when the text has errors.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { analyse } from '../../server/src/pipeline';
import type { ResolvedNeuron } from '../../server/src/model/types';

const ROOT = join(__dirname, '..', '..');

export function neuronsOf(text: string): Map<string, ResolvedNeuron> {
  const a = analyse(text);
  const errors = a.diagnostics.filter((d) => d.severity === 'error');
  if (errors.length) throw new Error(`model text has errors: ${errors.map((e) => e.message).join('; ')}`);
  return new Map(a.model.neurons.map((n) => [n.name, n]));
}

export function sampleText(file: string): string {
  return readFileSync(join(ROOT, 'samples', file), 'utf8');
}

export function sampleNeuron(file: string, name: string): ResolvedNeuron {
  const n = neuronsOf(sampleText(file)).get(name);
  if (!n) throw new Error(`no neuron ${name} in ${file}`);
  return n;
}

export function modelNeuron(text: string, name: string): ResolvedNeuron {
  const n = neuronsOf(text).get(name);
  if (!n) throw new Error(`no neuron ${name} in the text`);
  return n;
}

/**
 * The LIF with exponential current synapse of Wunderlich & Pehle 2021, Table 1, in model text:
 * tau_m 10 ms, tau_s 5 ms, threshold 1, hard reset to 0. Options vary what a test needs.
 */
export function lifText(o: { name?: string; doc?: string; trainable?: boolean; initialI?: number; incoming?: boolean } = {}): string {
  return `neuron ${o.name ?? 'L'}${o.doc ? ` "${o.doc}"` : ''} {
  param tau_m = 10 [ms]${o.trainable ? ' trainable' : ''}
  param tau_s = 5 [ms]
  param theta = 1
  state V = 0
  state I = ${o.initialI ?? 0}
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up { V := 0 }${o.incoming === false ? '' : '\n  incoming w { I := I + w }'}
}`;
}
