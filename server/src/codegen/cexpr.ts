// Printing a plan's Syms as C (and CUDA) expressions inside one generated function, and the
// bookkeeping that keeps the generated code free of unused variables (-Wall -Wextra
// -Werror): every symbol printed is recorded, and the function's local loads are emitted
// only for the recorded ones, in declaration order.
//
// Where the locals come from is per function: `stateFrom` names the struct whose arrays hold
// the states (`state`, `fwd`, `pre`), lambdas come from `adj`, loss partials from
// `loss_source`, the event inputs from their arrays. Parameters print as `par->name`, or as
// their model value with --inline-params.
// Invariant: a printed expression reads only locals that `loads()` declares, `par`, `dt` and `t_start`.
import type { Sym } from '../symbolic/sym';
import { substitute, num } from '../symbolic/sym';
import { toC } from '../symbolic/print';
import { type ModelPlan, roleOf } from './plan';
import { SPIKE_INPUTS, lambdaName, lossPartialName } from '../base/names';

export interface CFlavour {
  cuda: boolean;
  float: boolean;
  inline: boolean;
}

export interface CTypes {
  /** 'double' or 'float' */
  R: string;
  /** A literal in the working precision. */
  lit: (v: number) => string;
  /** A <math.h> function name in the working precision. */
  fn: (name: string) => string;
}

export function cTypes(f: CFlavour): CTypes {
  const suffix = f.float ? 'f' : '';
  return {
    R: f.float ? 'float' : 'double',
    lit: (v) => toC(num(v), { float: f.float }),
    fn: (name) => name + suffix,
  };
}

export type StateSource = 'state' | 'fwd' | 'pre';

export class CScope {
  readonly used = new Set<string>();
  private readonly params: Map<string, Sym>;
  constructor(readonly plan: ModelPlan, readonly flavour: CFlavour, readonly stateFrom: StateSource | null, readonly time: string) {
    this.params = new Map(flavour.inline ? plan.params.map((p) => [p.name, num(p.valueSI)] as const) : []);
  }

  /** The C text of s, recording the symbols it reads. */
  e(s: Sym): string {
    const body = this.flavour.inline ? substitute(s, this.params) : s;
    return toC(body, {
      float: this.flavour.float,
      name: (n) => {
        this.used.add(n);
        const r = roleOf(this.plan, n);
        if (!r) return n;
        switch (r.kind) {
          case 'state': case 'weight': case 'lambda': case 'loss-partial': case 'derived': return r.id;
          case 'param': return `par->${r.id}`;
          case 'time': return this.time;
        }
      },
    });
  }

  usesParams(): boolean {
    return !this.flavour.inline && this.plan.params.some((p) => this.used.has(p.name));
  }

  /** Declarations of the locals the printed expressions read (plus `extraStates`). */
  loads(extraStates: readonly string[] = []): string[] {
    const { R, lit } = cTypes(this.flavour);
    const cuda = this.flavour.cuda;
    const out: string[] = [];
    const from = this.stateFrom;
    for (const s of this.plan.states) {
      if (from && (this.used.has(s.name) || extraStates.includes(s.name))) out.push(`const ${R} ${s.id} = ${from}.${s.id}[idx];`);
    }
    const w = this.plan.weight;
    if (w && this.used.has(w.name)) out.push(`const ${R} ${w.id} = weights[idx];`);
    for (const s of this.plan.states) {
      const lam = lambdaName(s.id);
      if (this.used.has(lambdaName(s.name))) out.push(`const ${R} ${lam} = adj.${lam}[idx];`);
    }
    for (const s of this.plan.states) {
      if (!this.used.has(lossPartialName(s.name))) continue;
      const src = cuda ? `loss_source.${s.id}` : `loss_source->${s.id}`;
      const guard = cuda ? src : `loss_source && ${src}`;
      out.push(`const ${R} ${lossPartialName(s.id)} = ${guard} ? ${src}[idx] : ${lit(0)};`);
    }
    for (const [name, arr] of SPIKE_INPUTS) if (this.used.has(name)) out.push(`const ${R} ${name} = ${arr} ? ${arr}[idx] : ${lit(0)};`);
    return out;
  }
}
