// The NumPy printer's expression scope (parameter and state names as the generated Python
// spells them, and the set of names a body used) and the kit the backward printer shares.
import type { Sym } from '../symbolic/sym';
import { num, substitute } from '../symbolic/sym';
import { toPython } from '../symbolic/print';
import { type ModelPlan, roleOf } from './plan';

export class PyScope {
  readonly used = new Set<string>();
  constructor(readonly plan: ModelPlan, readonly inline: boolean) {}
  e(s: Sym): string {
    const body = this.inline ? substitute(s, new Map(this.plan.params.map((p) => [p.name, num(p.valueSI)] as const))) : s;
    return toPython(body, { name: (n) => {
      this.used.add(n);
      const r = roleOf(this.plan, n);
      if (!r) return n;
      if (r.kind === 'param') return `par["${r.id}"]`;
      if (r.kind === 'time') return 't';
      return r.id;
    } });
  }
}

export interface BackwardKit {
  inline: boolean;
  PyScope: typeof PyScope;
  setup: (scope: PyScope, body: readonly string[], time: string | null) => string[];
  loads: (scope: PyScope, from: string, all?: boolean) => string[];
  gradLines: (sc: PyScope, pick: (p: string) => Sym | null | undefined, factor: string, mask?: string) => string[];
  fnDef: (sig: string, doc: string[], body: string[]) => void;
  plain: (s: Sym) => string;
  st: (n: string) => { id: string; name: string };
  assign: (target: string) => string[];
}
