// The interface every learning rule implements (ARCHITECTURE.md "Registries"): what the
// faces need to list a rule, show its derivation for a neuron (hover, preview, CodeLens) and
// print it (the CLI command named by `command`). A rule is one module behind this interface;
// rules/index.ts lists them. The derivations themselves live in their stages (adjoint/, eprop/).
// Invariant: every method is pure and total on a well-formed neuron (a reason, never a throw).
import type { ResolvedNeuron } from '../model/types';

export type RuleFormat = 'text' | 'markdown' | 'latex' | 'json';

/** What a hover is on: a state, the fire block, the incoming block (or its weight), the surrogate line. */
export type RuleHoverItem = { kind: 'state'; name: string } | { kind: 'fire' } | { kind: 'incoming'; weight?: string } | { kind: 'surrogate' };

export interface RulePreviewRow { label: string; latex: string; note?: string }
export interface RulePreviewSection { title: string; note?: string; rows: RulePreviewRow[] }

export interface RuleOutputOptions {
  /** The effective grid step in seconds (Analysis.timestep), when there is one. */
  dt?: number;
}

export interface LearningRule {
  /** Stable identifier (`--rule` values, settings): 'eventprop', 'eprop'. */
  id: string;
  /** Display name. */
  label: string;
  /** The `saltus` subcommand that prints the derivation. */
  command: string;
  /** One line for lists (CLI help, docs). */
  summary: string;
  /** A paragraph for the command's help: what is derived, and the convention. */
  describe: string;
  /** The docs page with the rule's JSON contract. */
  doc: string;
  /** Whether the output depends on the grid step (then the command takes --timestep). */
  usesTimestep: boolean;
  /** Why this rule derives nothing for the neuron, or undefined when it does. */
  unavailable(n: ResolvedNeuron): string | undefined;
  /** The CodeLens title; `cachedOnly` asks not to derive (undefined: not derived yet). */
  lens(n: ResolvedNeuron, cachedOnly: boolean): string | undefined;
  /** Hover Markdown for an item of the neuron, or undefined when the rule has nothing to say there. */
  hover(n: ResolvedNeuron, item: RuleHoverItem): string | undefined;
  /** Preview sections of the neuron (empty when the rule does not apply). */
  preview(n: ResolvedNeuron): { badge: string; sections: RulePreviewSection[]; notes: string[] };
  /** The derivation of the neurons in one of the formats (json: the rule's contract, serialised). */
  render(ns: readonly ResolvedNeuron[], format: RuleFormat, options: RuleOutputOptions): string;
}
