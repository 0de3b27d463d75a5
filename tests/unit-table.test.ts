// The unit table the server looks symbols up in (server/src/units/unitTable.ts) is mathjs's own:
// rebuilt from mathjs here and compared with the committed file, and the table's lookup
// (units/unitSymbols.ts) checked against mathjs's own lookup (the library as oracle: `new
// Unit(1, symbol)` of the same private instance) on every unit name with every prefix mathjs
// knows, their letter-case variants and random letter strings.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
// @ts-expect-error: a plain .mjs script without types
import { TABLE_FILE, buildUnitTable, saltusMathUnits, unitTableSource } from '../scripts/unit-table.mjs';
import { lookupUnitSymbol, type SymbolLookup } from '../server/src/units/unitSymbols';
import { BASE_DIMENSION_NAMES, dimFromArray } from '../server/src/units/dimension';

interface MathUnit { value: number | null; dimensions: number[]; units: { unit: { offset: number }; prefix: { value: number } }[] }
const Unit = saltusMathUnits() as { new (v: number, s: string): MathUnit; BASE_DIMENSIONS: string[]; UNITS: Record<string, unknown>; PREFIXES: Record<string, Record<string, unknown>> };
const index = BASE_DIMENSION_NAMES.map((n) => Unit.BASE_DIMENSIONS.indexOf(n));

/** What mathjs itself says about one symbol, in lookupUnitSymbol's terms (ok, scale, dimension). */
function oracle(symbol: string): { ok: boolean; scale?: number; dim?: readonly number[] } {
  let u: MathUnit;
  try { u = new Unit(1, symbol); } catch { return { ok: false }; }
  if (u.units.length !== 1 || u.units[0]!.unit.offset !== 0) return { ok: false };
  const scale = u.value;
  if (typeof scale !== 'number' || !Number.isFinite(scale) || scale <= 0) return { ok: false };
  return { ok: true, scale, dim: dimFromArray(index.map((i) => u.dimensions[i] ?? 0)) };
}
const ours = (symbol: string): { ok: boolean; scale?: number; dim?: readonly number[] } => {
  const r: SymbolLookup = lookupUnitSymbol(symbol);
  return r.ok ? { ok: true, scale: r.scale, dim: r.dim } : { ok: false };
};

describe('unit table (generated from mathjs)', () => {
  it('the committed table is what scripts/unit-table.mjs builds from the installed mathjs (else run it)', () => {
    expect(readFileSync(TABLE_FILE, 'utf8')).toBe(unitTableSource(buildUnitTable()));
  });

  it('looks up every unit with every prefix exactly as mathjs does (scale bit for bit, dimension, refusals)', () => {
    const names = Object.keys(Unit.UNITS);
    const prefixes = new Set<string>(['']);
    for (const set of Object.values(Unit.PREFIXES)) for (const p of Object.keys(set)) prefixes.add(p);
    let checked = 0, found = 0;
    for (const name of names) {
      for (const p of prefixes) {
        const symbol = p + name;
        if (!/^[A-Za-z]{1,32}$/.test(symbol)) continue;
        const want = oracle(symbol);
        expect(ours(symbol), symbol).toEqual(want);
        checked++;
        if (want.ok) found++;
      }
    }
    expect(checked).toBeGreaterThan(10_000);
    expect(found).toBeGreaterThan(2_000);
  });

  it('agrees with mathjs on letter-case variants and random letter strings (mostly refusals)', () => {
    let seed = 12345;
    const rand = (n: number): number => { seed = (seed * 1103515245 + 12345) % 2147483648; return seed % n; };
    const letters = 'abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ';
    const symbols: string[] = [];
    for (const s of ['mV', 'ms', 'nS', 'pF', 'MOhm', 'kOhm', 'uM', 'mM', 'Hz', 'kHz', 'mA', 'uA', 'nA', 'degC', 'K', 'min', 'h', 'hr', 'day', 'in', 'Mv', 'MS', 'um', 'mum', 'Ohm', 'ohm', 'Mohm', 'M', 'molar']) {
      symbols.push(s, s.toUpperCase(), s.toLowerCase());
    }
    for (let k = 0; k < 3_000; k++) {
      const n = 1 + rand(5);
      let s = '';
      for (let i = 0; i < n; i++) s += letters[rand(letters.length)];
      symbols.push(s);
    }
    for (const s of symbols) expect(ours(s), s).toEqual(oracle(s));
  });

  it('keeps the modeller spellings and refuses offset units with a reason', () => {
    expect(lookupUnitSymbol('MOhm')).toMatchObject({ ok: true, scale: 1e6 });
    expect(lookupUnitSymbol('uM')).toMatchObject({ ok: true });
    expect((lookupUnitSymbol('uM') as { scale: number }).scale).toBeCloseTo(1e-3, 15);
    expect(lookupUnitSymbol('degC')).toMatchObject({ ok: false, message: expect.stringMatching(/offset/) });
    expect(lookupUnitSymbol('Mv')).toMatchObject({ ok: false, message: expect.stringMatching(/did you mean 'MV' or 'mV'/) });
  });
});
