// Straight-line programs of Syms: named assignments evaluated in order, then outputs over the
// inputs and those names. Multi-stage step maps are written this way (each stage value
// named once), so that neither printing nor differentiating them repeats sub-expressions.
// `tangents` differentiates a program in forward mode, symbolically: for an input v, the
// tangent of assignment u is  du/dv = d expr_u/dv + sum over earlier names w in expr_u of
// (d expr_u/dw) dw/dv,  itself an assignment named `tangentName(v, u)`.
// Assignment names contain a '.' (never a model identifier), e.g. `stage.A.V`.
// Invariants: pure; an assignment refers only to inputs and earlier names; tangent
// assignments are omitted where they are identically 0.
import { type Sym, ZERO, add, dependsOn, freeSymbols, mul, sym } from './sym';
import { derivative } from './derivative';
import { normalise } from './normalise';
import { type Compiled, compile } from './evaluate';

export interface Assignment { name: string; expr: Sym }

export interface Program {
  assigns: Assignment[];
  outputs: Sym[];
}

export const tangentName = (input: string, name: string): string => `d[${input}].${name}`;

const isZero = (s: Sym): boolean => s.k === 'num' && s.v === 0;

/**
 * Derivatives of every output by each of `inputs`: the tangent assignments they need (in
 * order, after the program's own) and, per input, the derivative of each output.
 */
export function tangents(p: Program, inputs: readonly string[]): { assigns: Assignment[]; d: Map<string, Sym[]> } {
  const assigns: Assignment[] = [];
  const d = new Map<string, Sym[]>();
  const names = p.assigns.map((a) => a.name);
  for (const v of inputs) {
    // tangent of each assignment by v (ZERO when it does not depend on v)
    const tan = new Map<string, Sym>();
    const total = (expr: Sym): Sym => {
      const terms: Sym[] = [derivative(expr, v)];
      const free = freeSymbols(expr);
      for (const w of names) {
        if (!free.has(w)) continue;
        const tw = tan.get(w);
        if (!tw || isZero(tw)) continue;
        terms.push(mul(derivative(expr, w), tw));
      }
      return normalise(add(...terms));
    };
    for (const a of p.assigns) {
      const t = total(a.expr);
      if (isZero(t)) { tan.set(a.name, ZERO); continue; }
      if (t.k === 'num' || t.k === 'sym') { tan.set(a.name, t); continue; }
      const name = tangentName(v, a.name);
      assigns.push({ name, expr: t });
      tan.set(a.name, sym(name));
    }
    d.set(v, p.outputs.map(total));
  }
  return { assigns, d };
}

/** The assignments (in order) that `exprs` need, directly or through other assignments. */
export function needed(assigns: readonly Assignment[], exprs: readonly Sym[]): Assignment[] {
  const want = new Set<string>();
  for (const e of exprs) for (const s of freeSymbols(e)) want.add(s);
  const keep: boolean[] = new Array<boolean>(assigns.length).fill(false);
  for (let i = assigns.length - 1; i >= 0; i--) {
    if (!want.has(assigns[i]!.name)) continue;
    keep[i] = true;
    for (const s of freeSymbols(assigns[i]!.expr)) want.add(s);
  }
  return assigns.filter((_, i) => keep[i]);
}

/** Whether `e` depends on `name` directly or through the assignments. */
export function dependsThrough(assigns: readonly Assignment[], e: Sym, name: string): boolean {
  if (dependsOn(e, name)) return true;
  const deps = new Set<string>([name]);
  for (const a of assigns) if ([...deps].some((x) => dependsOn(a.expr, x))) deps.add(a.name);
  return [...deps].some((x) => x !== name && dependsOn(e, x));
}

/**
 * A compiled program slice: `run(values)` evaluates the assignments in order into their slots
 * of the values vector (slot i of `layout`), so compiled outputs can read them.
 */
export function compileAssigns(assigns: readonly Assignment[], layout: readonly string[]): (values: Float64Array) => void {
  const slots = assigns.map((a) => layout.indexOf(a.name));
  const parts: Compiled[] = assigns.map((a) => compile(a.expr, layout));
  return (values) => { for (let i = 0; i < parts.length; i++) values[slots[i]!] = parts[i]!(values); };
}
