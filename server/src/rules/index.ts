// The registry of learning rules (ARCHITECTURE.md "Registries"): the faces (CLI commands,
// hover, preview, CodeLens) enumerate RULES instead of naming rules. To add a rule, write
// rules/NAME.ts implementing LearningRule (rules/types.ts) and list it here.
import type { LearningRule } from './types';
import { EVENTPROP } from './eventprop';
import { EPROP } from './eprop';

export const RULES: readonly LearningRule[] = [EVENTPROP, EPROP];

export function ruleById(id: string): LearningRule | undefined {
  return RULES.find((r) => r.id === id);
}
