// Values of a scenario file (docs/crosscheck.md): a JSON number is SI; a string is a quantity
// with its unit in brackets, as the model language writes units: "2 [nS]", "1.5 [ms]",
// "-60 [mV]". A quantity is read into SI against the dimension its field needs (a weight has
// the dimension of the receiving model's `incoming` weight, a parameter or state its
// declared one, a time is a time), with a message naming what was expected.
//
// A bare number is taken as SI, which is where a unit mistake hides: 1.6 written for a
// weight the model file writes in nA is 1.6 A, a billion times too large, and the run
// explodes or stays silent. `prefixSuspect` finds such numbers: the number read in the file's
// unit is far from plausible while the number itself looks like a value in that unit (or,
// for a parameter, it is the file's own value written in the file's unit).
// Invariants: pure; never throws; SI out.
import { type Dim, describeDim, dimEqual, formatNumber, formatQuantity, isDimensionless, parseUnit } from '../units';

/** What a field expects: its dimension (when known), what it is in words, and the file's unit for it. */
export interface Expected { dim?: Dim; what: string; unitText?: string }

export type QuantityRead = { ok: true; si: number; bare: boolean } | { ok: false; message: string };

const NUMBER = '[+-]?(?:\\d+\\.?\\d*|\\.\\d+)(?:[eE][+-]?\\d+)?';
const QUANTITY = new RegExp(`^\\s*(${NUMBER})\\s*\\[([^\\[\\]]*)\\]\\s*$`);
const UNBRACKETED = new RegExp(`^\\s*(${NUMBER})\\s*([A-Za-zµΩ][A-Za-z0-9µΩ/*^ ]*?)\\s*$`);
const example = (e: Expected): string => (e.unitText && e.unitText !== '1' ? `"2 [${e.unitText}]"` : e.dim && !isDimensionless(e.dim) ? `"2 [${describeUnit(e.dim)}]"` : '2');

function describeUnit(dim: Dim): string {
  const m = /\(([^()]+)\)$/.exec(describeDim(dim));
  return m ? m[1]! : 's';
}

/**
 * A number (SI) or a quantity string, in SI; undefined when `v` is neither a number nor a
 * string (the caller words that message, as for any other wrong type).
 */
export function readQuantity(v: unknown, e: Expected): QuantityRead | undefined {
  if (typeof v === 'number') return Number.isFinite(v) ? { ok: true, si: v, bare: true } : { ok: false, message: `must be a finite number; got ${String(v)}` };
  if (typeof v !== 'string') return undefined;
  const text = v.length > 60 ? `${v.slice(0, 57)}...` : v;
  const m = QUANTITY.exec(v);
  if (!m) {
    const u = UNBRACKETED.exec(v);
    if (u) return { ok: false, message: `write the unit in brackets, as in a model file: "${u[1]} [${u[2]}]"` };
    return { ok: false, message: `must be a number (SI) or a quantity with its unit in brackets, e.g. ${example(e)}; got "${text}"` };
  }
  const value = Number(m[1]);
  const unitText = m[2]!.trim();
  if (unitText === '') return { ok: false, message: `"${text}": empty brackets; write the unit, e.g. ${example(e)}, or give a plain number for SI` };
  const unit = parseUnit(unitText);
  if (!unit.ok) return { ok: false, message: `"${text}": ${unit.message}` };
  if (e.dim && !dimEqual(unit.dim, e.dim)) {
    return { ok: false, message: `"${text}" is ${article(describeDim(unit.dim))}, but ${e.what} is ${article(describeDim(e.dim, e.unitText ? [e.unitText] : []))}: e.g. ${example(e)}` };
  }
  const si = value * unit.scale;
  if (!Number.isFinite(si)) return { ok: false, message: `"${text}" is too large to represent` };
  return { ok: true, si, bare: false };
}

/** The message for a value that is neither a number nor a string. */
export function typeMessage(e: Expected, got: string): string {
  return `must be a finite number${e.dim && !isDimensionless(e.dim) ? ` (SI) or a quantity such as ${example(e)}` : ''}; got ${got}`;
}

const article = (s: string): string => (/^(dimensionless|a |an )/.test(s) ? s : `${/^[aeiou]/i.test(s) ? 'an' : 'a'} ${s}`);

/** A bare number that looks as if it was written in the file's unit, not in SI. */
export interface UnitSuspect { path: string; message: string }

/**
 * Whether the bare number `si` at `path` looks off by a unit prefix: the file writes this
 * value in a unit with a prefix of at least 100 (nS, ms, pF...) and either (with `reference`,
 * the file's own SI value) the number equals the file's value written in the file's unit,
 * within a factor of 10, or (without one) the number in the file's unit is 10^4 or more times
 * off 1 while the number itself is within 10^3 of 1. Common practice, our thresholds.
 */
export function prefixSuspect(path: string, si: number, e: Expected, reference?: number): UnitSuspect | undefined {
  if (!e.unitText || !e.dim || si === 0 || !Number.isFinite(si)) return undefined;
  const u = parseUnit(e.unitText);
  if (!u.ok || !(u.scale > 0) || Math.abs(Math.log10(u.scale)) < 2) return undefined;
  const inFileUnit = Math.abs(si) / u.scale;
  let suspicious: boolean;
  if (reference !== undefined && reference !== 0 && Number.isFinite(reference)) {
    suspicious = Math.abs(Math.log10(Math.abs(si) / Math.abs(reference)) + Math.log10(u.scale)) <= 1;
  } else {
    suspicious = Math.abs(Math.log10(inFileUnit)) >= 4 && Math.abs(Math.log10(Math.abs(si))) <= 3;
  }
  if (!suspicious) return undefined;
  const n = formatNumber(si);
  return { path, message: `${n} is read as SI, ${formatQuantity(si, e.dim, e.unitText)}; if ${e.what} was meant in ${e.unitText}, write "${n} [${e.unitText}]" (or ${formatNumber(si * u.scale)})` };
}
