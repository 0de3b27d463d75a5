// Renders dimensions and quantities for messages and hovers, in the modeller's own units
// where possible: `formatDim(dim of mV/ms, ['mV', 'ms'])` gives 'mV/ms', not 'kg*m^2/(s^4*A)'.
//
// Search (bounded): candidate units are the preferred unit texts that parse (deduplicated by
// dimension, at most MAX_PREFERRED), then standard units (V A s S F ohm C mol/m^3 and the SI
// base units) whose dimension no preferred unit already has. A product of one or two
// candidates with small integer exponents (one candidate also with half exponents), else
// of three with exponents up to 2, is chosen by a cost that favours fewer factors, the
// preferred units, small exponents and a numerator; otherwise the SI base units are written out.
// Invariants: never throws; the text returned for a non-dimensionless dim has exactly that
// dimension (when it uses only integer exponents it re-parses with parseUnit to it).

import { DIM_TOLERANCE, TIME, dimEqual, dimKey, dimMul, dimPow, isDimensionless, type Dim } from './dimension';
import { parseUnit } from './unitParse';

interface Candidate {
  text: string;
  dim: Dim;
  scale: number;
  /** Its text contains an operator, so it needs parentheses inside a larger expression. */
  compound: boolean;
  standard: boolean;
  order: number;
  /** For a standard compound unit: its symbols, so that (mol/m^3)/s renders as mol/(m^3*s). */
  parts?: readonly { text: string; e: number }[];
}

export interface UnitExpression {
  readonly text: string;
  /** Factor converting one of this unit to SI coherent base units. */
  readonly scale: number;
}

const MAX_PREFERRED = 24;
const STANDARD_UNITS = ['V', 'A', 's', 'S', 'F', 'ohm', 'C', 'mol/m^3', 'kg', 'm', 'K', 'mol', 'cd', 'rad', 'bit'];
/** How the compound standard units are built from single symbols (checked against parseUnit in the tests). */
const STANDARD_PARTS: Readonly<Record<string, readonly { text: string; e: number }[]>> = {
  'mol/m^3': [
    { text: 'mol', e: 1 },
    { text: 'm', e: -3 },
  ],
};
/** Symbols for writing a Dim out in SI base units, in BASE_DIMENSION_NAMES order. */
const BASE_SYMBOLS = ['kg', 'm', 's', 'A', 'K', 'cd', 'mol', 'rad', 'bit'];

const INTEGER_EXPONENTS = [1, -1, 2, -2, 3, -3];
const SINGLE_EXPONENTS = [...INTEGER_EXPONENTS, 0.5, -0.5, 1.5, -1.5];
const TRIPLE_EXPONENTS = [1, -1, 2, -2];
const MAX_TRIPLE_CANDIDATES = 16;

function toCandidate(text: string, standard: boolean, order: number): Candidate | null {
  const r = parseUnit(text);
  if (!r.ok || isDimensionless(r.dim)) return null;
  return { text: r.canonical, dim: r.dim, scale: r.scale, compound: /[*/^]/.test(r.canonical), standard, order };
}

let standardCandidates: Candidate[] | null = null;
function standards(): Candidate[] {
  if (!standardCandidates) {
    standardCandidates = [];
    STANDARD_UNITS.forEach((t, i) => {
      const c = toCandidate(t, true, 1000 + i);
      const parts = STANDARD_PARTS[t];
      if (c) standardCandidates!.push(parts ? { ...c, parts } : c);
    });
  }
  return standardCandidates;
}

function candidatesFor(preferred: readonly string[]): Candidate[] {
  const out: Candidate[] = [];
  for (const text of preferred.slice(0, 4 * MAX_PREFERRED)) {
    if (out.length >= MAX_PREFERRED) break;
    const c = typeof text === 'string' ? toCandidate(text, false, out.length) : null;
    if (c && !out.some((o) => dimEqual(o.dim, c.dim))) out.push(c);
  }
  for (const s of standards()) {
    if (!out.some((o) => dimEqual(o.dim, s.dim))) out.push(s);
  }
  return out;
}

/** Writes an exponent: 2, -1, (1/2), (-3/2). */
function exponentText(e: number): string {
  if (Number.isInteger(e)) return String(e);
  for (let q = 2; q <= 12; q++) {
    const p = Math.round(e * q);
    if (Math.abs(p / q - e) < 1e-9) return `(${p}/${q})`;
  }
  return `(${Number(e.toPrecision(6))})`;
}

function factorText(text: string, compound: boolean, e: number, wrapCompound: boolean): string {
  const a = Math.abs(e);
  const base = compound && (wrapCompound || a !== 1) ? `(${text})` : text;
  return a === 1 ? base : `${base}^${exponentText(a)}`;
}

/** Renders factors (text, compound, exponent) as num/den, e.g. 'mV/ms', '1/(ms*mV)', '(mV/ms)^2'. */
function renderFactors(factors: { text: string; compound: boolean; e: number }[]): string {
  const num = factors.filter((f) => f.e > 0);
  const den = factors.filter((f) => f.e < 0);
  const numText =
    num.length === 0 ? '1' : num.map((f) => factorText(f.text, f.compound, f.e, factors.length > 1)).join('*');
  if (den.length === 0) return numText;
  const denParts = den.map((f) => factorText(f.text, f.compound, f.e, true));
  return `${numText}/${denParts.length === 1 ? denParts[0]! : `(${denParts.join('*')})`}`;
}

function cost(parts: { c: Candidate; e: number }[]): number {
  let total = 0;
  // A standard unit on its own (S, ohm, 1/s) reads better than a pair of the modeller's units
  // (nA/mV) or an inverse (1/nS); inside a product the modeller's units win.
  const alone = parts.length === 1 && Math.abs(parts[0]!.e) === 1;
  for (const { c, e } of parts) {
    const standardPenalty = c.standard ? (alone ? 0.4 : 1.2) : 0;
    total += 1 + 0.75 * (Math.abs(e) - 1) + standardPenalty + (c.compound ? 0.3 : 0) + c.order * 1e-6;
  }
  if (!parts.some((p) => p.e > 0)) total += 0.5;
  return total;
}

function toExpression(chosen: { c: Candidate; e: number }[]): UnitExpression {
  const ordered = [...chosen].sort((x, y) => x.c.order - y.c.order);
  // Expand standard compounds into their symbols and merge repeated symbols.
  const factors: { text: string; compound: boolean; e: number }[] = [];
  for (const { c, e } of ordered) {
    const pieces = c.parts ? c.parts.map((p) => ({ text: p.text, compound: false, e: p.e * e })) : [{ text: c.text, compound: c.compound, e }];
    for (const piece of pieces) {
      const same = piece.compound ? undefined : factors.find((f) => !f.compound && f.text === piece.text);
      if (same) same.e += piece.e;
      else factors.push(piece);
    }
  }
  return {
    text: renderFactors(factors.filter((f) => f.e !== 0)),
    scale: ordered.reduce((s, { c, e }) => s * Math.pow(c.scale, e), 1),
  };
}

function siBaseExpression(dim: Dim): UnitExpression {
  const factors = BASE_SYMBOLS.map((text, i) => ({ text, compound: false, e: dim[i] ?? 0 })).filter((f) => f.e !== 0);
  return { text: renderFactors(factors), scale: 1 };
}

/** True when x + y (+ z) equals target component by component (DIM_TOLERANCE). */
function sumEquals(target: Dim, x: Dim, y: Dim, z?: Dim): boolean {
  for (let i = 0; i < target.length; i++) {
    const v = x[i]! + y[i]! + (z ? z[i]! : 0);
    if (Math.abs(v - target[i]!) > DIM_TOLERANCE) return false;
  }
  return true;
}

function search(dim: Dim, cands: Candidate[]): UnitExpression | null {
  let best: { c: Candidate; e: number }[] | null = null;
  let bestCost = Infinity;
  const consider = (parts: { c: Candidate; e: number }[]) => {
    const k = cost(parts);
    if (k < bestCost) {
      bestCost = k;
      best = parts;
    }
  };
  // powers[i][n] = cands[i].dim ^ INTEGER_EXPONENTS[n], computed once.
  const powers = cands.map((c) => INTEGER_EXPONENTS.map((e) => dimPow(c.dim, e)));
  for (const c of cands) {
    for (const e of SINGLE_EXPONENTS) if (dimEqual(dimPow(c.dim, e), dim)) consider([{ c, e }]);
  }
  for (let i = 0; i < cands.length; i++) {
    for (let j = i + 1; j < cands.length; j++) {
      for (let na = 0; na < INTEGER_EXPONENTS.length; na++) {
        for (let nb = 0; nb < INTEGER_EXPONENTS.length; nb++) {
          if (sumEquals(dim, powers[i]![na]!, powers[j]![nb]!)) {
            consider([{ c: cands[i]!, e: INTEGER_EXPONENTS[na]! }, { c: cands[j]!, e: INTEGER_EXPONENTS[nb]! }]);
          }
        }
      }
    }
  }
  if (!best) {
    // Triple exponents are the first TRIPLE_EXPONENTS.length entries of INTEGER_EXPONENTS.
    const n = Math.min(cands.length, MAX_TRIPLE_CANDIDATES);
    const m = TRIPLE_EXPONENTS.length;
    for (let i = 0; i < n; i++) {
      for (let j = i + 1; j < n; j++) {
        for (let k = j + 1; k < n; k++) {
          for (let na = 0; na < m; na++) {
            for (let nb = 0; nb < m; nb++) {
              for (let nc = 0; nc < m; nc++) {
                if (sumEquals(dim, powers[i]![na]!, powers[j]![nb]!, powers[k]![nc]!)) {
                  consider([
                    { c: cands[i]!, e: TRIPLE_EXPONENTS[na]! },
                    { c: cands[j]!, e: TRIPLE_EXPONENTS[nb]! },
                    { c: cands[k]!, e: TRIPLE_EXPONENTS[nc]! },
                  ]);
                }
              }
            }
          }
        }
      }
    }
  }
  return best ? toExpression(best) : null;
}

const CACHE_LIMIT = 256;
const cache = new Map<string, UnitExpression>();

/** The unit expression chosen for a dimension, with its SI scale. Dimensionless gives '1'. */
export function unitExpressionFor(dim: Dim, preferred: readonly string[] = []): UnitExpression {
  try {
    if (isDimensionless(dim)) return { text: '1', scale: 1 };
    if (!dim.every((v) => Number.isFinite(v))) return { text: '?', scale: 1 };
    const list = Array.isArray(preferred) ? preferred : [];
    const key = `${dimKey(dim)}|${list.join('\u0000')}`;
    const hit = cache.get(key);
    if (hit) return hit;
    const found = search(dim, candidatesFor(list)) ?? siBaseExpression(dim);
    if (cache.size >= CACHE_LIMIT) cache.clear();
    cache.set(key, found);
    return found;
  } catch {
    return siBaseExpression(dim);
  }
}

/**
 * A dimension written with the preferred units alone (no standard SI unit such as A or S), or
 * null when they cannot express it. Two sides of a unit mismatch are both written this way
 * where they can be, so that a message never sets 'A' against 'ms*mV'.
 */
export function formatDimInOwnUnits(dim: Dim, preferred: readonly string[]): string | null {
  try {
    if (isDimensionless(dim)) return '1';
    const own = candidatesFor(Array.isArray(preferred) ? preferred : []).filter((c) => !c.standard);
    if (own.length === 0) return null;
    return search(dim, own)?.text ?? null;
  } catch {
    return null;
  }
}

/** A dimension as a short unit expression, in the preferred units when possible ('mV/ms'; '1'). */
export function formatDim(dim: Dim, preferred?: readonly string[]): string {
  return unitExpressionFor(dim, preferred ?? []).text;
}

/** A number with at most `digits` significant digits, without float noise (280.99999999999994 -> '281'). */
export function formatNumber(value: number, digits = 6): string {
  if (!Number.isFinite(value)) return String(value);
  return String(Number(value.toPrecision(Math.min(Math.max(1, Math.round(digits)), 21))));
}

/**
 * A quantity given in SI coherent units, written as a Saltus literal: '20 [ms]', '1.5' when
 * dimensionless. Uses `preferred` as the unit if it is one text of the right dimension,
 * otherwise chooses one like formatDim does from the preferred list.
 */
export function formatQuantity(valueSI: number, dim: Dim, preferred?: string | readonly string[]): string {
  if (isDimensionless(dim)) return formatNumber(valueSI);
  if (typeof preferred === 'string') {
    const r = parseUnit(preferred);
    if (r.ok && dimEqual(r.dim, dim)) return `${formatNumber(valueSI / r.scale)} [${r.canonical}]`;
  }
  const list = typeof preferred === 'string' ? [preferred] : preferred ?? [];
  const expr = unitExpressionFor(dim, list);
  return `${formatNumber(valueSI / expr.scale)} [${expr.text}]`;
}

const QUANTITY_NAMES: [string, string][] = [
  ['voltage', 'V'],
  ['current', 'A'],
  ['time', 's'],
  ['rate', '1/s'],
  ['conductance', 'S'],
  ['capacitance', 'F'],
  ['resistance', 'ohm'],
  ['charge', 'C'],
  ['concentration', 'mol/m^3'],
  ['amount of substance', 'mol'],
  ['mass', 'kg'],
  ['length', 'm'],
  ['area', 'm^2'],
  ['volume', 'm^3'],
  ['temperature', 'K'],
  ['power', 'W'],
  ['energy', 'J'],
  ['angle', 'rad'],
];
let namedDims: { name: string; dim: Dim }[] | null = null;
function quantityName(dim: Dim): string | null {
  if (!namedDims) {
    namedDims = [];
    for (const [name, text] of QUANTITY_NAMES) {
      const r = parseUnit(text);
      if (r.ok) namedDims.push({ name, dim: r.dim });
    }
  }
  const exact = namedDims.find((q) => dimEqual(q.dim, dim));
  if (exact) return exact.name;
  const perTime = namedDims.find((q) => q.name !== 'rate' && dimEqual(q.dim, dimMul(dim, TIME)));
  if (perTime) return `${perTime.name} per time`;
  return null;
}

/** Words for a dimension: 'dimensionless', 'voltage per time (mV/ms)', or just the unit expression. */
export function describeDim(dim: Dim, preferred?: readonly string[]): string {
  if (isDimensionless(dim)) return 'dimensionless';
  const name = quantityName(dim);
  const text = formatDim(dim, preferred);
  return name ? `${name} (${text})` : text;
}

