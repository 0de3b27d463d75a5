// A form of a Sym for reading, not for computing: sums grouped by their common factors, so a
// derived equation reads as a modeller would write it:
//   g*lambda_V/C_m - dlV_dV + g_L*lambda_V/C_m   ->  -lambda_V * (g + g_L) / C_m - dlV_dV
//   w*lambda_V*E_exc/C_m - w*lambda_V*V/C_m        ->  w * lambda_V * (E_exc - V) / C_m
//   C * (a + lambda_V*b/C)                          ->  C * a + lambda_V * b
// Rules, applied from the inside out:
//   - a factor (a base with its exponent, numbers apart) common to every term of a sum is taken
//     out, the smallest power of it; a sum whose terms are all negative takes out the sign;
//   - otherwise the factor shared by the most terms (at least two; costates `lambda_*` first on a
//     tie) groups those terms, and the rest is grouped the same way;
//   - a product of a sum and a factor whose inverse appears in some of the sum's terms is
//     multiplied out when that cancels (no `C * (... / C)`).
// The canonical form (normalise.ts) stays what every computation uses: this is a display
// matter only (renderers, hovers, messages; never the JSON contract or generated code).
// Invariants: pure; never throws; the result has the value of the input (up to rounding);
// bounded (each rule strictly shrinks the sum it works on; cancelling is tried once per product).
import { type Sym, add, mul, num, pow } from './sym';
import { key, normalise } from './normalise';
import { toMathjs } from './print';

interface Factor { base: Sym; e: number; k: string }
interface Term { coef: number; factors: Factor[] }

function termOf(t: Sym): Term {
  const parts = t.k === 'mul' ? t.factors : [t];
  let coef = 1;
  const factors: Factor[] = [];
  for (const f of parts) {
    if (f.k === 'num') { coef *= f.v; continue; }
    if (f.k === 'pow' && f.exp.k === 'num') factors.push({ base: f.base, e: f.exp.v, k: key(f.base) });
    else factors.push({ base: f, e: 1, k: key(f) });
  }
  return { coef, factors };
}

function symOf(t: Term): Sym {
  return product(num(t.coef), ...t.factors.filter((f) => f.e !== 0).map((f) => (f.e === 1 ? f.base : pow(f.base, num(f.e)))));
}

/** A product with nested products spliced in and its numbers multiplied into one leading coefficient. */
function product(...fs: Sym[]): Sym {
  let coef = 1;
  const out: Sym[] = [];
  const visit = (f: Sym): void => {
    if (f.k === 'mul') { for (const g of f.factors) visit(g); return; }
    if (f.k === 'num') { coef *= f.v; return; }
    out.push(f);
  };
  for (const f of fs) visit(f);
  if (coef !== 1 || out.length === 0) out.unshift(num(coef));
  return out.length === 1 ? out[0]! : mul(...out);
}

const isCostate = (f: Factor): boolean => f.base.k === 'sym' && f.base.name.startsWith('lambda_');

/** Whether every term holds this base with an exponent of the same sign; the common exponent. */
function commonExponent(terms: Term[], k: string): number | undefined {
  let e: number | undefined;
  for (const t of terms) {
    const f = t.factors.find((x) => x.k === k);
    if (!f || f.e === 0) return undefined;
    if (e === undefined) e = f.e;
    else if (Math.sign(e) !== Math.sign(f.e)) return undefined;
    else e = Math.sign(e) * Math.min(Math.abs(e), Math.abs(f.e));
  }
  return e;
}

const without = (t: Term, k: string, e: number): Term => ({ coef: t.coef, factors: t.factors.map((f) => (f.k === k ? { ...f, e: f.e - e } : f)).filter((f) => f.e !== 0) });

/** A sum of terms, grouped. */
function group(terms: Term[], depth: number): Sym {
  if (terms.length === 0) return num(0);
  if (terms.length === 1 || depth > 24) return terms.length === 1 ? readableTerm(terms[0]!, depth) : add(...terms.map((t) => readableTerm(t, depth)));
  // factors common to every term
  const common: Factor[] = [];
  for (const f of terms[0]!.factors) {
    const e = commonExponent(terms, f.k);
    if (e !== undefined && !common.some((c) => c.k === f.k)) common.push({ ...f, e });
  }
  const allNegative = terms.every((t) => t.coef < 0);
  if (common.length || allNegative) {
    let inner = terms;
    for (const c of common) inner = inner.map((t) => without(t, c.k, c.e));
    if (allNegative) inner = inner.map((t) => ({ ...t, coef: -t.coef }));
    const rest = group(inner, depth + 1);
    const outside = common.sort((x, y) => Number(isCostate(x)) - Number(isCostate(y)) || (x.e < 0 ? 1 : 0) - (y.e < 0 ? 1 : 0) || (x.k < y.k ? -1 : 1));
    const pos = outside.filter((c) => c.e > 0).map((c) => readablePower(c, depth));
    const neg = outside.filter((c) => c.e < 0).map((c) => readablePower(c, depth));
    return product(...(allNegative ? [num(-1)] : []), ...pos, rest, ...neg);
  }
  // the factor shared by the most terms
  const counts = new Map<string, { f: Factor; n: number }>();
  for (const t of terms) for (const f of t.factors) {
    const sign = Math.sign(f.e);
    const k = `${sign}|${f.k}`;
    const c = counts.get(k);
    if (c) c.n++; else counts.set(k, { f, n: 1 });
  }
  let best: { f: Factor; n: number } | undefined;
  for (const c of counts.values()) {
    if (c.n < 2) continue;
    if (!best || c.n > best.n || (c.n === best.n && isCostate(c.f) && !isCostate(best.f))) best = c;
  }
  if (!best || best.n === terms.length) return add(...terms.map((t) => readableTerm(t, depth)));
  const sign = Math.sign(best.f.e);
  const has = (t: Term): boolean => t.factors.some((f) => f.k === best!.f.k && Math.sign(f.e) === sign);
  const grouped = group(terms.filter(has), depth + 1);
  const rest = group(terms.filter((t) => !has(t)), depth + 1);
  return add(grouped, ...(rest.k === 'add' ? rest.terms : [rest]));
}

function readablePower(f: Factor, depth: number): Sym {
  const b = readableAt(f.base, depth + 1);
  return f.e === 1 ? b : pow(b, num(f.e));
}

function readableTerm(t: Term, depth: number): Sym {
  // a * (b / a + c): the factor outside cancels inside, so multiply the sum out first
  if (depth < 24 && t.factors.length > 1 && t.factors.some((f) => f.e === 1 && f.base.k === 'add')) {
    const whole = symOf(t);
    const opened = whole.k === 'mul' ? cancelInto(whole) : undefined;
    if (opened) return readableAt(opened, depth + 1);
  }
  return symOf({ coef: t.coef, factors: t.factors.map((f) => ({ ...f, base: readableAt(f.base, depth + 1) })) });
}

/** C * (a + b / C) -> C * a + b: multiply a sum out where a factor cancels a denominator in it. */
function cancelInto(s: Sym & { k: 'mul' }): Sym | undefined {
  const sums = s.factors.filter((f) => f.k === 'add');
  if (sums.length !== 1) return undefined;
  const sum = sums[0] as Sym & { k: 'add' };
  const others = s.factors.filter((f) => f !== sum);
  const outside = others.map(termOf).flatMap((t) => t.factors).filter((f) => f.e > 0);
  const cancels = outside.some((o) => sum.terms.some((t) => termOf(t).factors.some((f) => f.k === o.k && f.e < 0)));
  if (!cancels) return undefined;
  return normalise(add(...sum.terms.map((t) => {
    const term = product(...others, t);
    return (term.k === 'mul' ? cancelInto(term) : undefined) ?? term;
  })));
}

function readableAt(s: Sym, depth: number): Sym {
  switch (s.k) {
    case 'num': case 'sym': return s;
    case 'fn': return { k: 'fn', name: s.name, args: s.args.map((a) => readableAt(a, depth + 1)) };
    case 'pow': return pow(readableAt(s.base, depth + 1), s.exp);
    case 'mul': {
      const opened = depth < 24 ? cancelInto(s) : undefined;
      if (opened && opened.k === 'add') return group(opened.terms.map(termOf), depth + 1);
      if (opened) return readableAt(opened, depth + 1);
      const t = termOf(s);
      return readableTerm(t, depth);
    }
    case 'add': return group(s.terms.map(termOf), depth);
  }
}

/** The grouped form of a (canonical) Sym, for display. */
export function readable(s: Sym): Sym {
  try {
    return readableAt(s, 0);
  } catch {
    return s;
  }
}

/** The grouped form as plain text (mathjs syntax), for messages, hovers and the CLI. */
export function readableText(s: Sym): string {
  return toMathjs(readable(s));
}
