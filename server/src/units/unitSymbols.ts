// Looks up one unit symbol (with an SI prefix, e.g. `mV`, `MOhm`, `uM`) in a private mathjs
// instance and returns its dimension and its scale to SI coherent base units.
//
// Invariants:
// - The mathjs instance is created lazily, lives only in this module and is never exported.
//   It is only ever asked about a single symbol that matched /^[A-Za-z]{1,32}$/: user text is
//   never evaluated or parsed as a mathjs expression (the expression syntax is ours, see
//   unitParse.ts).
// - Modeller spellings are added to the private instance only: `Ohm` (so `MOhm`, `kOhm`,
//   `GOhm` work; mathjs spells megaohm `Mohm`) and the molar `M` = 1000 mol/m^3 (so `mM`, `uM`).
// - Units with an offset (degC, degF) are refused: a scale factor cannot express them.
// - lookupUnitSymbol never throws.

// Only the factories units need (the Unit class and createUnit), not the whole library: the
// bundle and the start-up stay small (docs/performance.md).
import { create, createUnitDependencies, unitDependencies } from 'mathjs';
import { BASE_DIMENSION_NAMES, DIM_LENGTH, dimFromArray, type Dim } from './dimension';

export type SymbolLookup =
  | { ok: true; dim: Dim; scale: number; symbol: string }
  | { ok: false; message: string };

/** What a unit symbol may look like before mathjs is asked about it. */
export const UNIT_SYMBOL_PATTERN = /^[A-Za-z]{1,32}$/;

interface MathUnitPart {
  unit: { name: string; offset: number };
  prefix: { name: string };
  power: number;
}
interface MathUnitLike {
  value: number | null;
  dimensions: number[];
  units: MathUnitPart[];
}
interface PrivateUnits {
  makeUnit(symbol: string): MathUnitLike;
  /** For each of our Dim components, its index in mathjs's dimension vector. */
  componentIndex: number[];
}

let privateUnits: PrivateUnits | null | undefined; // undefined: not tried yet; null: setup failed
let setupError = '';

function setup(): PrivateUnits | null {
  if (privateUnits !== undefined) return privateUnits;
  try {
    const math = create({ createUnitDependencies, unitDependencies });
    math.createUnit('Ohm', { definition: '1 ohm', prefixes: 'short' });
    math.createUnit('M', { definition: '1000 mol/m^3', prefixes: 'short' });
    const UnitCtor = math.Unit as unknown as {
      new (value: number, name: string): MathUnitLike;
      BASE_DIMENSIONS: string[];
    };
    const baseNames = UnitCtor.BASE_DIMENSIONS;
    const componentIndex = BASE_DIMENSION_NAMES.map((name) => baseNames.indexOf(name));
    if (componentIndex.some((i) => i < 0) || baseNames.length !== DIM_LENGTH) {
      throw new Error(`unexpected mathjs base dimensions: ${baseNames.join(', ')}`);
    }
    privateUnits = {
      makeUnit: (symbol: string) => new UnitCtor(1, symbol),
      componentIndex,
    };
  } catch (e) {
    setupError = e instanceof Error ? e.message : String(e);
    privateUnits = null;
  }
  return privateUnits;
}

const CACHE_LIMIT = 512;
const cache = new Map<string, SymbolLookup>();

function lookupUncached(symbol: string, units: PrivateUnits): SymbolLookup {
  let u: MathUnitLike;
  try {
    u = units.makeUnit(symbol);
  } catch {
    return { ok: false, message: `unknown unit '${symbol}'${suggestionFor(symbol, units)}` };
  }
  if (u.units.length !== 1) return { ok: false, message: `unknown unit '${symbol}'` };
  const part = u.units[0]!;
  if (part.unit.offset !== 0) {
    return {
      ok: false,
      message: `unit '${symbol}' has an offset from zero and cannot be used in a unit expression; use K`,
    };
  }
  const scale = u.value;
  if (typeof scale !== 'number' || !Number.isFinite(scale) || scale <= 0) {
    return { ok: false, message: `unit '${symbol}' has no usable scale` };
  }
  const dim = dimFromArray(units.componentIndex.map((i) => u.dimensions[i] ?? 0));
  return { ok: true, dim, scale, symbol };
}

function exists(symbol: string, units: PrivateUnits): boolean {
  try {
    const u = units.makeUnit(symbol);
    return u.units.length === 1 && u.units[0]!.unit.offset === 0;
  } catch {
    return false;
  }
}

/**
 * A hint for a symbol that differs from known ones only in letter case ("Mv" -> 'MV' or 'mV'):
 * tries every one-letter and (for short symbols) two-letter case change, lists up to three.
 */
function suggestionFor(symbol: string, units: PrivateUnits): string {
  if (symbol.length > 8) return '';
  const flip = (c: string) => (c === c.toLowerCase() ? c.toUpperCase() : c.toLowerCase());
  const candidates: string[] = [];
  for (let i = 0; i < symbol.length; i++) {
    candidates.push(symbol.slice(0, i) + flip(symbol[i]!) + symbol.slice(i + 1));
  }
  for (let i = 0; i < symbol.length; i++) {
    for (let j = i + 1; j < symbol.length; j++) {
      const chars = symbol.split('');
      chars[i] = flip(chars[i]!);
      chars[j] = flip(chars[j]!);
      candidates.push(chars.join(''));
    }
  }
  const found: string[] = [];
  for (const c of candidates) {
    if (c !== symbol && !found.includes(c) && exists(c, units)) found.push(c);
    if (found.length === 3) break;
  }
  if (found.length === 0) return '';
  return ` (did you mean ${found.map((f) => `'${f}'`).join(' or ')}?)`;
}

/**
 * Dimension and SI scale of one unit symbol, e.g. 'mV' -> voltage, 1e-3.
 * Returns an error (never throws) for anything that is not a single known symbol.
 */
export function lookupUnitSymbol(symbol: string): SymbolLookup {
  if (typeof symbol !== 'string' || !UNIT_SYMBOL_PATTERN.test(symbol)) {
    return { ok: false, message: `'${String(symbol).slice(0, 40)}' is not a unit symbol` };
  }
  const cached = cache.get(symbol);
  if (cached) return cached;
  const units = setup();
  if (!units) return { ok: false, message: `unit library unavailable: ${setupError}` };
  let result: SymbolLookup;
  try {
    result = lookupUncached(symbol, units);
  } catch (e) {
    result = { ok: false, message: `unit '${symbol}' could not be read (${e instanceof Error ? e.message : String(e)})` };
  }
  if (cache.size >= CACHE_LIMIT) cache.clear();
  cache.set(symbol, result);
  return result;
}
