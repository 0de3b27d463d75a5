// Looks up one unit symbol (with an SI prefix, e.g. `mV`, `MOhm`, `uM`) in mathjs's unit table
// and returns its dimension and its scale to SI coherent base units.
//
// Invariants:
// - The table (`unitTable.ts`) is mathjs's own, generated from it by scripts/unit-table.mjs
//   and checked against it by tests/unit-table.test.ts: every unit in mathjs's lookup order,
//   its value, offset and dimensions, and its prefix set. The lookup below is mathjs's: an
//   exact unit name first, else the first unit (in table order) whose name ends the symbol
//   and whose prefix set holds the rest. No mathjs instance is built at run time (its set-up
//   cost about 100 ms of the server's start; docs/performance.md).
// - Only a single symbol that matched /^[A-Za-z]{1,32}$/ is looked up; user text is never
//   evaluated (the expression syntax is ours, see unitParse.ts).
// - Modeller spellings are part of the table: `Ohm` (so `MOhm`, `kOhm`, `GOhm` work; mathjs
//   spells megaohm `Mohm`) and the molar `M` = 1000 mol/m^3 (so `mM`, `uM`).
// - Units with an offset (degC, degF) are refused: a scale factor cannot express them.
// - lookupUnitSymbol never throws.
import { BASE_DIMENSION_NAMES, DIM_LENGTH, dimFromArray, type Dim } from './dimension';
import { PREFIX_SETS, TABLE_BASE_DIMENSIONS, UNIT_ROWS } from './unitTable';

export type SymbolLookup =
  | { ok: true; dim: Dim; scale: number; symbol: string }
  | { ok: false; message: string };

/** What a unit symbol may look like before the table is asked about it. */
export const UNIT_SYMBOL_PATTERN = /^[A-Za-z]{1,32}$/;

interface Found { value: number | null; offset: number; dims: readonly number[]; prefix: number }

/** For each of our Dim components, its index in the table's dimension vectors. */
const componentIndex = BASE_DIMENSION_NAMES.map((name) => TABLE_BASE_DIMENSIONS.indexOf(name));
const tableUsable = componentIndex.every((i) => i >= 0) && TABLE_BASE_DIMENSIONS.length === DIM_LENGTH;
const byName = new Map(UNIT_ROWS.map((row) => [row[0], row] as const));

/** mathjs's `_findUnit`: the exact name first, else the first unit whose name ends the symbol with an allowed prefix. */
function findUnit(symbol: string): Found | undefined {
  const exact = byName.get(symbol);
  const bare = exact ? PREFIX_SETS[exact[4]]?.[''] : undefined;
  if (exact && bare !== undefined) return { value: exact[1], offset: exact[2], dims: exact[3], prefix: bare };
  for (const [name, value, offset, dims, set] of UNIT_ROWS) {
    if (!symbol.endsWith(name)) continue;
    const prefixes = PREFIX_SETS[set]!;
    const prefixName = symbol.slice(0, symbol.length - name.length);
    if (Object.hasOwn(prefixes, prefixName)) return { value, offset, dims, prefix: prefixes[prefixName]! };
  }
  return undefined;
}

const CACHE_LIMIT = 512;
const cache = new Map<string, SymbolLookup>();

function lookupUncached(symbol: string): SymbolLookup {
  const u = findUnit(symbol);
  if (!u) return { ok: false, message: `unknown unit '${symbol}'${suggestionFor(symbol)}` };
  if (u.offset !== 0) {
    return {
      ok: false,
      message: `unit '${symbol}' has an offset from zero and cannot be used in a unit expression; use K`,
    };
  }
  const scale = u.value === null ? NaN : u.value * u.prefix; // as mathjs normalises a value of 1 in this unit
  if (!Number.isFinite(scale) || scale <= 0) {
    return { ok: false, message: `unit '${symbol}' has no usable scale` };
  }
  const dim = dimFromArray(componentIndex.map((i) => u.dims[i] ?? 0));
  return { ok: true, dim, scale, symbol };
}

function exists(symbol: string): boolean {
  const u = findUnit(symbol);
  return u !== undefined && u.offset === 0;
}

/**
 * A hint for a symbol that differs from known ones only in letter case ("Mv" -> 'MV' or 'mV'):
 * tries every one-letter and (for short symbols) two-letter case change, lists up to three.
 */
function suggestionFor(symbol: string): string {
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
    if (c !== symbol && !found.includes(c) && exists(c)) found.push(c);
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
  if (!tableUsable) return { ok: false, message: `unit table unusable: unexpected base dimensions ${TABLE_BASE_DIMENSIONS.join(', ')}` };
  let result: SymbolLookup;
  try {
    result = lookupUncached(symbol);
  } catch (e) {
    result = { ok: false, message: `unit '${symbol}' could not be read (${e instanceof Error ? e.message : String(e)})` };
  }
  if (cache.size >= CACHE_LIMIT) cache.clear();
  cache.set(symbol, result);
  return result;
}
