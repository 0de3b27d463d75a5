// LaTeX printer for Sym: readable formulas for hovers and generated documents.
// \frac for divisions, juxtaposition for products (\cdot before a digit), \left( \right)
// only where precedence needs them. Symbol names: `lambda_V` -> \lambda_{V}, `tau_m` ->
// \tau_{m}, `tau_syn` -> \tau_{\mathrm{syn}}, `x1` -> x_{1}, `dlV_dX` -> \frac{\partial
// l_{V}}{\partial X}; Greek letter names (lower case, and upper case where LaTeX has a
// macro: Delta_T -> \Delta_{T}) become macros. A `names` callback overrides any name (return
// undefined to keep the default), e.g. to print `gdot` as \dot{g}.
// Invariant: output is valid math-mode LaTeX for every Sym (KaTeX renders it).

import type { Sym } from './sym';
import { fraction, signed } from './printShape';

const GREEK = new Set(('alpha beta gamma delta epsilon zeta eta theta iota kappa lambda mu nu xi pi rho sigma tau ' +
  'upsilon phi chi psi omega Gamma Delta Theta Lambda Xi Pi Sigma Upsilon Phi Psi Omega').split(' '));

function word(w: string): string {
  if (GREEK.has(w)) return '\\' + w;
  if (w.length === 1 || /^[0-9]+$/.test(w)) return w;
  return `\\mathrm{${w}}`;
}

/** Default LaTeX for a symbol name (see the header for the conventions). */
export function latexName(name: string): string {
  const partial = /^d([A-Za-z])([A-Za-z0-9]*)_d([A-Za-z][A-Za-z0-9_]*)$/.exec(name);
  if (partial) {
    const top = partial[2] ? `${word(partial[1]!)}_{${word(partial[2])}}` : word(partial[1]!);
    return `\\frac{\\partial ${top}}{\\partial ${latexName(partial[3]!)}}`;
  }
  const parts = name.split('_');
  if (parts.some((p) => p === '')) return `\\mathrm{${name.replace(/_/g, '\\_')}}`;
  if (parts.length === 1) {
    const digits = /^([A-Za-z]+?)([0-9]+)$/.exec(name);
    return digits ? `${word(digits[1]!)}_{${digits[2]}}` : word(name);
  }
  return `${word(parts[0]!)}_{${parts.slice(1).map(word).join(',')}}`;
}

const SUM = 1, PRODUCT = 2, UNARY = 3, POWER = 4, ATOM = 5;
interface Printed { t: string; p: number }
const paren = (t: string): string => `\\left(${t}\\right)`;
const wrap = (x: Printed, min: number): string => (x.p >= min ? x.t : paren(x.t));

function latexNumber(v: number): Printed {
  if (Number.isNaN(v)) return { t: '\\mathrm{NaN}', p: ATOM };
  if (v === Infinity) return { t: '\\infty', p: ATOM };
  const [mantissa, exponent] = String(v).split('e');
  if (exponent === undefined) return { t: mantissa!, p: ATOM };
  const e = exponent.replace(/^\+/, '');
  return mantissa === '1' ? { t: `10^{${e}}`, p: POWER } : { t: `${mantissa} \\cdot 10^{${e}}`, p: PRODUCT };
}

function joinFactors(items: Printed[]): string {
  return items.map((x, i) => {
    const t = wrap(x, POWER);
    return i === 0 ? t : (/^[0-9-]/.test(t) ? ' \\cdot ' : ' ') + t;
  }).join('');
}

/** Readable LaTeX (math mode) for s. */
export function toLatex(s: Sym, names?: (name: string) => string | undefined): string {
  const p = (s: Sym): Printed => {
    switch (s.k) {
      case 'num': {
        if (s.v < 0 || Object.is(s.v, -0)) return { t: '-' + wrap(latexNumber(-s.v), PRODUCT), p: UNARY };
        return latexNumber(s.v);
      }
      case 'sym': return { t: names?.(s.name) ?? latexName(s.name), p: ATOM };
      case 'add': return sum(s.terms);
      case 'mul': return product(s);
      case 'pow': return s.exp.k === 'num' && s.exp.v < 0 ? product(s) : power(s.base, s.exp);
      case 'fn': return call(s.name, s.args);
    }
  };
  const power = (base: Sym, exp: Sym): Printed => {
    const b = p(base);
    const bare = base.k === 'sym' || (base.k === 'fn' && (base.name === 'sqrt' || base.name === 'abs')) || (base.k === 'num' && b.p === ATOM && base.v >= 0);
    return { t: `${bare ? b.t : paren(b.t)}^{${p(exp).t}}`, p: POWER };
  };
  const call = (name: string, args: Sym[]): Printed => {
    const a = args.map((x) => p(x).t);
    switch (name) {
      case 'sqrt': return { t: `\\sqrt{${a[0] ?? ''}}`, p: ATOM };
      case 'abs': return { t: `\\left|${a[0] ?? ''}\\right|`, p: ATOM };
      case 'sigmoid': return { t: `\\operatorname{sigmoid}${paren(a.join(', '))}`, p: ATOM };
      case 'pow': return args.length === 2 ? power(args[0]!, args[1]!) : { t: `\\operatorname{pow}${paren(a.join(', '))}`, p: ATOM };
      case 'expdd': {
        // phi1(z) for e[z, 0]; otherwise the divided-difference notation exp[x0, ..., xm]
        const zero = args.findIndex((x) => x.k === 'num' && x.v === 0);
        if (args.length === 2 && zero >= 0) return { t: `\\varphi_1${paren(a[1 - zero]!)}`, p: ATOM };
        return { t: `\\exp[${a.join(', ')}]`, p: ATOM };
      }
      default: return { t: `\\${name}${paren(a.join(', '))}`, p: ATOM };
    }
  };
  const sum = (terms: Sym[]): Printed => {
    if (terms.length === 0) return { t: '0', p: ATOM };
    if (terms.length === 1) return p(terms[0]!);
    const ordered = [...terms.filter((t) => t.k !== 'num'), ...terms.filter((t) => t.k === 'num')];
    const lead = ordered.findIndex((t) => !signed(t).negative);
    if (lead > 0) ordered.unshift(...ordered.splice(lead, 1));
    const text = ordered.map((t, i) => {
      const { negative, magnitude } = signed(t);
      const body = wrap(p(negative ? magnitude : t), i === 0 && !negative ? SUM : PRODUCT);
      return (negative ? (i === 0 ? '-' : ' - ') : i === 0 ? '' : ' + ') + body;
    });
    return { t: text.join(''), p: SUM };
  };
  const product = (s: Sym): Printed => {
    const f = fraction(s);
    const top: Printed[] = [];
    if (f.coefficient !== 1) top.push(latexNumber(f.coefficient));
    for (const x of f.numerator) top.push(p(x));
    const bottom: Printed[] = [];
    if (f.divisor !== 1) bottom.push(latexNumber(f.divisor));
    for (const x of f.denominator) bottom.push(p(x));
    const side = (items: Printed[]): string => (items.length === 1 ? items[0]!.t : joinFactors(items));
    let body: Printed;
    if (bottom.length > 0) body = { t: `\\frac{${top.length ? side(top) : '1'}}{${side(bottom)}}`, p: PRODUCT };
    else if (top.length === 0) body = { t: '1', p: ATOM };
    else body = top.length === 1 ? top[0]! : { t: joinFactors(top), p: PRODUCT };
    return f.negative ? { t: '-' + wrap(body, PRODUCT), p: UNARY } : body;
  };
  return p(s).t;
}
