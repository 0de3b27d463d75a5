// Parameters whose sign the model depends on: time constants (a time that divides a flow),
// capacitances, and any parameter that divides a flow, guard or jump. A zero divisor makes
// the equations undefined, so it is refused (error); a negative time constant or
// capacitance is allowed by the equations (decay becomes growth, the membrane's response
// is reversed) but is almost surely a slip, so it is a warning. Used by resolve.ts for the
// file's values and by the cross-check for a scenario's parameter overrides.
// Invariant: pure; names the parameter in every message; never throws.
import type { Sym } from '../symbolic/sym';
import { type Dim, TIME, dimEqual, dimFromExponents } from '../units';

/** The dimension of a capacitance (farad = A^2 s^4 kg^-1 m^-2). */
const CAPACITANCE: Dim = dimFromExponents({ MASS: -1, LENGTH: -2, TIME: 4, CURRENT: 2 });

export type ConstantRole = 'time constant' | 'capacitance' | 'divisor';

export interface ConstantUse { role: ConstantRole; /** e.g. 'dV/dt' — where it divides (may be empty for a capacitance). */ where: string[] }

/** Names that appear as a whole factor of a denominator (x / p, x / (2 p), x * p^-2) of a
 *  resolved expression (the lowering writes a / b as a * b^-1). */
function divisorNames(s: Sym, out: Set<string>): void {
  const visit = (t: Sym): void => {
    switch (t.k) {
      case 'pow': {
        const e = t.exp;
        if (e.k === 'num' && e.v < 0) {
          const b = t.base;
          if (b.k === 'sym') out.add(b.name);
          else if (b.k === 'mul') for (const f of b.factors) if (f.k === 'sym') out.add(f.name);
        }
        visit(t.base); visit(t.exp);
        return;
      }
      case 'add': t.terms.forEach(visit); return;
      case 'mul': t.factors.forEach(visit); return;
      case 'fn': t.args.forEach(visit); return;
      default: return;
    }
  };
  visit(s);
}

/** The parameters of a neuron whose sign matters, with their role and where they divide. */
export function constantUses(n: {
  params: readonly { name: string; dim?: Dim }[];
  flows: ReadonlyMap<string, Sym>;
  fire?: { guard: Sym; jumps: ReadonlyMap<string, Sym> };
  receptors: readonly { jumps: ReadonlyMap<string, Sym> }[];
  /** A quiet period's flows (`quiet for`), which divide like the normal ones. */
  quiet?: { flows: ReadonlyMap<string, Sym> };
}): Map<string, ConstantUse> {
  const divides = new Map<string, string[]>();
  const note = (s: Sym, where: string): void => {
    const names = new Set<string>();
    divisorNames(s, names);
    for (const p of names) divides.set(p, [...(divides.get(p) ?? []), where]);
  };
  for (const [x, f] of n.flows) note(f, `d${x}/dt`);
  if (n.quiet) for (const [x, f] of n.quiet.flows) note(f, `d${x}/dt`);
  if (n.fire) {
    note(n.fire.guard, 'the guard');
    for (const [x, h] of n.fire.jumps) note(h, `the jump of ${x}`);
  }
  for (const inc of n.receptors) for (const [x, r] of inc.jumps) note(r, `the incoming jump of ${x}`);
  const out = new Map<string, ConstantUse>();
  for (const p of n.params) {
    const where = [...new Set(divides.get(p.name) ?? [])];
    if (p.dim && dimEqual(p.dim, CAPACITANCE)) out.set(p.name, { role: 'capacitance', where });
    else if (where.length && p.dim && dimEqual(p.dim, TIME) && where.some((w) => w.endsWith('/dt'))) out.set(p.name, { role: 'time constant', where });
    else if (where.length) out.set(p.name, { role: 'divisor', where });
  }
  return out;
}

/** What is wrong with `value` for a parameter of this use, if anything. */
export function constantProblem(name: string, use: ConstantUse, value: number, shown: string): { severity: 'error' | 'warning'; message: string } | undefined {
  const divides = use.where.length ? ` (it divides ${use.where.join(', ')})` : '';
  if (value === 0 && (use.where.length || use.role === 'capacitance')) {
    const what = use.role === 'divisor' ? `'${name}'` : `the ${use.role} '${name}'`;
    return { severity: 'error', message: `${what} is 0${divides}: the equations are undefined there${use.role === 'divisor' ? '' : `; a ${use.role} must be positive`}` };
  }
  if (value < 0 && use.role !== 'divisor') {
    const effect = use.role === 'time constant' ? 'the decay it sets becomes a growth' : "the membrane's response to a current is reversed";
    return { severity: 'warning', message: `the ${use.role} '${name}' is negative (${shown})${divides}: ${effect}; a ${use.role} is positive (the equations allow it, so this is a warning)` };
  }
  return undefined;
}
