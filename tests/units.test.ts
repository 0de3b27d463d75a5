// Tests for the unit and dimension layer (server/src/units). Expected values come from
// outside the code under test: the SI Brochure (BIPM 2019, 9th ed.) for prefixes and derived
// units, the IUPAC Green Book for the molar, and mathjs only for its base-dimension order.
import { describe, expect, test } from 'vitest';
import fc from 'fast-check';
import { create, all } from 'mathjs';
import * as units from '../server/src/units';
import {
  BASE_DIMENSION_NAMES,
  DIMENSIONLESS,
  TIME,
  dimDiv,
  dimEqual,
  dimFromExponents,
  dimMul,
  dimPow,
  isDimensionless,
  parseUnit,
  formatDim,
  formatQuantity,
  describeDim,
  type Dim,
} from '../server/src/units';

function ok(text: string): { dim: Dim; scale: number; canonical: string } {
  const r = parseUnit(text);
  if (!r.ok) throw new Error(`parseUnit('${text}') failed: ${r.message}`);
  return r;
}
function relClose(a: number, b: number, tol = 1e-12): boolean {
  return Math.abs(a - b) <= tol * Math.max(Math.abs(a), Math.abs(b));
}

// SI Brochure 9th ed. (BIPM 2019), Table 4: coherent derived units in SI base units
// (written from memory of the table; they follow from V = W/A, F = C/V, ohm = V/A, S = A/V).
const SI = {
  V: dimFromExponents({ MASS: 1, LENGTH: 2, TIME: -3, CURRENT: -1 }),
  A: dimFromExponents({ CURRENT: 1 }),
  s: dimFromExponents({ TIME: 1 }),
  F: dimFromExponents({ MASS: -1, LENGTH: -2, TIME: 4, CURRENT: 2 }),
  ohm: dimFromExponents({ MASS: 1, LENGTH: 2, TIME: -3, CURRENT: -2 }),
  S: dimFromExponents({ MASS: -1, LENGTH: -2, TIME: 3, CURRENT: 2 }),
  C: dimFromExponents({ TIME: 1, CURRENT: 1 }),
  Hz: dimFromExponents({ TIME: -1 }),
};
// SI Brochure 9th ed., Table 7: SI prefixes (from memory).
const PREFIX = { G: 1e9, M: 1e6, k: 1e3, m: 1e-3, u: 1e-6, n: 1e-9, p: 1e-12 };

describe('dimension algebra', () => {
  test('component order is mathjs Unit.BASE_DIMENSIONS (mathjs 15)', () => {
    const math = create(all);
    expect([...BASE_DIMENSION_NAMES]).toEqual([...(math.Unit as unknown as { BASE_DIMENSIONS: string[] }).BASE_DIMENSIONS]);
    expect(DIMENSIONLESS).toHaveLength(9);
    expect(TIME[2]).toBe(1);
  });
  test('mul/div/pow follow exponent arithmetic; sqrt gives halves', () => {
    // SI Brochure Table 4: ohm = V/A and S = 1/ohm, C = A*s, F = C/V.
    expect(dimEqual(dimDiv(SI.V, SI.A), SI.ohm)).toBe(true);
    expect(dimEqual(dimPow(SI.ohm, -1), SI.S)).toBe(true);
    expect(dimEqual(dimMul(SI.A, SI.s), SI.C)).toBe(true);
    expect(dimEqual(dimDiv(SI.C, SI.V), SI.F)).toBe(true);
    const half = dimPow(SI.V, 0.5);
    expect(half[1]).toBe(1);
    expect(half[2]).toBe(-1.5);
    expect(dimEqual(dimMul(half, half), SI.V)).toBe(true);
    expect(dimEqual(SI.V, SI.ohm)).toBe(false); // negative control
  });
  test('tolerance and snapping', () => {
    const third = dimPow(SI.s, 1 / 3);
    expect(dimEqual(dimPow(third, 3), SI.s)).toBe(true);
    expect(dimPow(third, 3)[2]).toBe(1); // 0.9999999999999999 snapped
    expect(dimEqual(dimFromExponents({ TIME: 1 + 1e-10 }), TIME)).toBe(true);
    expect(dimEqual(dimFromExponents({ TIME: 1 + 1e-6 }), TIME)).toBe(false);
    expect(isDimensionless(dimDiv(SI.V, SI.V))).toBe(true);
    expect(isDimensionless(SI.V)).toBe(false);
    expect(Object.isFrozen(dimMul(SI.V, SI.A))).toBe(true);
    expect(Object.is(dimMul(TIME, dimPow(TIME, -1))[2], 0)).toBe(true); // no -0
  });
});

describe('parseUnit: SI Brochure identities (BIPM 2019, 9th ed., prefixes of Table 7)', () => {
  test('prefixed symbols have the brochure dimension and prefix scale', () => {
    for (const [sym, dim, scale] of [
      ['mV', SI.V, PREFIX.m],
      ['ms', SI.s, PREFIX.m],
      ['us', SI.s, PREFIX.u],
      ['nA', SI.A, PREFIX.n],
      ['pA', SI.A, PREFIX.p],
      ['pF', SI.F, PREFIX.p],
      ['nS', SI.S, PREFIX.n],
      ['uS', SI.S, PREFIX.u],
      ['MOhm', SI.ohm, PREFIX.M],
      ['kOhm', SI.ohm, PREFIX.k],
      ['GOhm', SI.ohm, PREFIX.G],
      ['Mohm', SI.ohm, PREFIX.M],
      ['ohm', SI.ohm, 1],
      ['Ohm', SI.ohm, 1],
      ['kHz', SI.Hz, PREFIX.k],
    ] as const) {
      const r = ok(sym);
      expect(dimEqual(r.dim, dim), sym).toBe(true);
      expect(relClose(r.scale, scale), `${sym}: ${r.scale}`).toBe(true);
    }
  });

  // Each identity is checked twice: parsing the compound text, and composing the single
  // symbols through dimMul/dimDiv and scale products.
  test('1 nA / 1 pF = 1 V/ms = 1000 mV/ms', () => {
    const composed = { dim: dimDiv(ok('nA').dim, ok('pF').dim), scale: ok('nA').scale / ok('pF').scale };
    expect(dimEqual(composed.dim, dimDiv(SI.V, SI.s))).toBe(true);
    expect(relClose(composed.scale, PREFIX.n / PREFIX.p)).toBe(true);
    const parsed = ok('nA/pF');
    expect(dimEqual(parsed.dim, ok('V/ms').dim)).toBe(true);
    expect(relClose(parsed.scale, ok('V/ms').scale)).toBe(true);
    expect(relClose(parsed.scale / ok('mV/ms').scale, 1000)).toBe(true);
    expect(relClose(parsed.scale, 1000)).toBe(true); // 1 nA/pF = 1000 V/s
  });
  test('1 nS x 1 mV = 1 pA', () => {
    expect(dimEqual(dimMul(ok('nS').dim, ok('mV').dim), SI.A)).toBe(true);
    expect(relClose(ok('nS').scale * ok('mV').scale, ok('pA').scale)).toBe(true);
    expect(relClose(ok('nS*mV').scale, PREFIX.p)).toBe(true);
  });
  test('1 MOhm x 1 nA = 1 mV', () => {
    expect(dimEqual(dimMul(ok('MOhm').dim, ok('nA').dim), SI.V)).toBe(true);
    expect(relClose(ok('MOhm*nA').scale, ok('mV').scale)).toBe(true);
  });
  test('1 pF x 1 MOhm = 1 us', () => {
    expect(dimEqual(dimMul(ok('pF').dim, ok('MOhm').dim), SI.s)).toBe(true);
    expect(relClose(ok('pF').scale * ok('MOhm').scale, ok('us').scale)).toBe(true);
    expect(relClose(ok('pF*MOhm').scale, PREFIX.u)).toBe(true);
  });
  test('1 nS x 1 MOhm = 1e-3 (dimensionless)', () => {
    const r = ok('nS*MOhm');
    expect(isDimensionless(r.dim)).toBe(true);
    expect(relClose(r.scale, 1e-3)).toBe(true);
    expect(isDimensionless(ok('nS*ms').dim)).toBe(false); // negative control
  });
  test('molar: 1 M = 1 mol/dm^3 = 1000 mol/m^3 (IUPAC Green Book, 3rd ed. 2007, from memory)', () => {
    expect(dimEqual(ok('mM').dim, ok('mol/m^3').dim)).toBe(true);
    expect(relClose(ok('M').scale, 1000)).toBe(true);
    expect(relClose(ok('mM').scale, 1)).toBe(true);
    expect(relClose(ok('uM').scale, 1e-3)).toBe(true);
    expect(relClose(ok('M').scale, ok('mol/L').scale)).toBe(true); // L = dm^3 (SI Brochure Table 8)
  });
});

describe('parseUnit: syntax', () => {
  test('the unit forms of docs/language.md parse', () => {
    expect(dimEqual(ok('1/ms').dim, SI.Hz)).toBe(true);
    expect(relClose(ok('1/ms').scale, 1000)).toBe(true);
    expect(dimEqual(ok('s^-1').dim, SI.Hz)).toBe(true);
    expect(ok('s^-1').scale).toBe(1);
    expect(dimEqual(ok('mV/ms').dim, dimDiv(SI.V, SI.s))).toBe(true);
    expect(dimEqual(ok('uS*mV').dim, SI.A)).toBe(true);
    expect(relClose(ok('uS*mV').scale, 1e-9)).toBe(true);
  });
  test('exponents, parentheses, spaces and left associativity', () => {
    expect(dimEqual(ok('kg*m^2/s^3/A').dim, SI.V)).toBe(true); // Table 4 row for the volt
    expect(dimEqual(ok('kg*m^2/(s^3*A)').dim, SI.V)).toBe(true);
    expect(dimEqual(ok('s^(-2)').dim, dimPow(SI.s, -2))).toBe(true);
    expect(relClose(ok('ms^2').scale, 1e-6)).toBe(true); // (ms)^2, not m*s^2
    expect(dimEqual(ok('mV / ms').dim, ok('mV/ms').dim)).toBe(true);
    expect(dimEqual(ok('mV/ms*ms').dim, SI.V)).toBe(true); // (mV/ms)*ms
    expect(ok(' mV / ms ').canonical).toBe('mV/ms');
    expect(ok('(mV/ms)^2').canonical).toBe('(mV/ms)^2');
    expect(ok('nA/(pF*mV)').canonical).toBe('nA/(pF*mV)');
    expect(isDimensionless(ok('1').dim)).toBe(true);
    expect(ok('µs').canonical).toBe('us');
    expect(ok('MΩ').canonical).toBe('MOhm');
  });
  test.each([
    ['mX', "unknown unit 'mX'", 0, 2],
    ['mV/mX', "unknown unit 'mX'", 3, 2],
    ['nA / qq', "unknown unit 'qq'", 5, 2],
    ['mV ms', "expected '*' or '/'", 3, 2],
    ['mV/', 'expected a unit symbol', 3, 0],
    ['mV**ms', 'expected a unit symbol', 3, 1],
    ['2/ms', "number '2'", 0, 1],
    ['s^1.5', 'integer', 2, 3],
    ['s^x', 'integer exponent', 2, 1],
    ['(mV', "unclosed '('", 0, 1],
    ['mV)', "unmatched ')'", 2, 1],
    ['mV$', "unexpected character '$'", 2, 1],
    ['-mV', "'-'", 0, 1],
    ['s^99', 'too large', 2, 2],
    ['Ys^32*Ys^32', 'too large or too small', 0, 11],
    ['degC', 'offset', 0, 4],
    ['', 'empty unit', 0, 0],
  ])('%j is an error at the right place', (text, message, offset, length) => {
    const r = parseUnit(text);
    expect(r.ok).toBe(false);
    if (r.ok) return;
    expect(r.message).toContain(message);
    expect([r.offset, r.length]).toEqual([offset, length]);
  });
  test('a case slip gets a hint', () => {
    const r = parseUnit('Mv');
    expect(!r.ok && r.message).toContain("'mV'");
  });
  test('mathjs expression features are not reachable through unit text', () => {
    for (const t of ['evaluate', 'import', 'createUnit(x)', 'cos(1)', '1+1', 'x=2', '__proto__', 'constructor']) {
      expect(parseUnit(t).ok, t).toBe(false);
    }
    // Nothing exported is a mathjs instance.
    for (const [name, v] of Object.entries(units)) {
      expect(typeof v === 'object' && v !== null && 'evaluate' in v, name).toBe(false);
    }
  });
});

describe('parseUnit: properties (fast-check)', () => {
  const chars = fc.constantFrom(...'mVsnApFSuMOhkgol1023 */^()-+.µΩ·$'.split(''));
  test('never throws on arbitrary strings; error spans lie inside the text', () => {
    const check = (s: string) => {
      const r = parseUnit(s);
      if (!r.ok) {
        expect(r.offset).toBeGreaterThanOrEqual(0);
        expect(r.offset + r.length).toBeLessThanOrEqual(s.length);
        expect(r.message.length).toBeGreaterThan(0);
      } else {
        expect(Number.isFinite(r.scale) && r.scale > 0).toBe(true);
      }
    };
    fc.assert(fc.property(fc.string({ unit: 'binary', maxLength: 300 }), check), { numRuns: 500 });
    fc.assert(fc.property(fc.array(chars, { maxLength: 24 }).map((a) => a.join('')), check), { numRuns: 2000 });
  });
  const symbols = ['mV', 'ms', 'nA', 'pF', 'nS', 'uS', 'MOhm', 'mM', 's', 'kg', 'm'];
  const expr = fc.tuple(
    fc.array(fc.tuple(fc.constantFrom(...symbols), fc.integer({ min: -2, max: 2 }), fc.constantFrom('*', '/')), { minLength: 1, maxLength: 3 }),
  );
  test('a product parses to the algebra of its factors, and its canonical form re-parses', () => {
    fc.assert(
      fc.property(expr, ([factors]) => {
        let text = '';
        let dim: Dim = DIMENSIONLESS;
        let scale = 1;
        factors.forEach(([sym, k, op], i) => {
          const e = k === 0 ? 1 : k;
          const f = ok(sym);
          const sign = i === 0 || op === '*' ? 1 : -1;
          text += (i === 0 ? '' : op) + (e === 1 ? sym : `${sym}^${e}`);
          dim = dimMul(dim, dimPow(f.dim, sign * e));
          scale *= Math.pow(f.scale, sign * e);
        });
        const r = ok(text);
        expect(dimEqual(r.dim, dim)).toBe(true);
        expect(relClose(r.scale, scale, 1e-9)).toBe(true);
        const again = ok(r.canonical);
        expect(dimEqual(again.dim, r.dim) && relClose(again.scale, r.scale, 1e-12)).toBe(true);
      }),
      { numRuns: 300 },
    );
  });
  test('formatDim output has the dimension it names; formatQuantity round-trips the value', () => {
    const preferred = ['mV', 'ms', 'nA', 'pF', 'nS'];
    fc.assert(
      fc.property(expr, fc.double({ min: 1e-6, max: 1e6, noNaN: true }), ([factors], value) => {
        const text = factors.map(([s, k], i) => (i ? '/' : '') + `${s}^${k === 0 ? 1 : k}`).join('');
        const { dim } = ok(text);
        const shown = formatDim(dim, preferred);
        if (isDimensionless(dim)) expect(shown).toBe('1');
        else expect(dimEqual(ok(shown).dim, dim), `${text} -> ${shown}`).toBe(true);
        const q = formatQuantity(value, dim, preferred);
        const m = /^(\S+)(?: \[(.+)\])?$/.exec(q);
        expect(m, q).not.toBeNull();
        const back = Number(m![1]) * (m![2] ? ok(m![2]).scale : 1);
        expect(relClose(back, value, 1e-5), `${q} vs ${value}`).toBe(true);
      }),
      { numRuns: 300 },
    );
  });
});

describe('formatDim / formatQuantity / describeDim', () => {
  const P = ['mV', 'ms', 'nA', 'pF', 'nS'];
  test('uses the modeller’s units', () => {
    expect(formatDim(ok('mV/ms').dim, ['mV', 'ms'])).toBe('mV/ms');
    expect(formatDim(ok('nA/pF').dim, P)).toBe('mV/ms'); // same dimension as V/s
    expect(formatDim(SI.A, P)).toBe('nA');
    expect(formatDim(SI.S, P)).toBe('nS');
    expect(formatDim(SI.Hz, P)).toBe('1/ms');
    expect(formatDim(dimMul(SI.V, SI.s), P)).toBe('mV*ms');
    expect(formatDim(dimDiv(SI.A, SI.s), P)).toBe('nA/ms');
    expect(formatDim(dimPow(SI.V, 2), P)).toBe('mV^2');
    expect(formatDim(ok('mV/ms').dim, ['mV/ms'])).toBe('mV/ms');
    expect(formatDim(ok('mM').dim, ['mM', 'ms'])).toBe('mM');
    expect(formatDim(ok('mM/ms').dim, ['mM', 'ms'])).toBe('mM/ms');
    expect(formatDim(ok('mM/ms').dim, P)).toBe('mol/(ms*m^3)'); // standard mol/m^3 expanded
    expect(dimEqual(ok('mol/(ms*m^3)').dim, ok('mM/ms').dim)).toBe(true);
  });
  test('dimensionless and fallbacks', () => {
    expect(formatDim(DIMENSIONLESS, P)).toBe('1');
    expect(formatDim(ok('nS*MOhm').dim)).toBe('1');
    expect(formatDim(SI.V)).toBe('V');
    expect(formatDim(SI.ohm, ['nS'])).toBe('ohm');
    expect(formatDim(ok('mol/m^3').dim)).toBe('mol/m^3');
    // No short product of known units: written out in SI base units.
    const odd = dimFromExponents({ MASS: 3, LENGTH: 1, TIME: -7, CURRENT: 5 });
    expect(formatDim(odd)).toBe('kg^3*m*A^5/s^7');
    expect(formatDim(dimPow(SI.s, 0.5))).toBe('s^(1/2)');
  });
  test('formatQuantity', () => {
    // AdEx capacitance 281 pF (Brette & Gerstner 2005, from memory) given in SI.
    expect(formatQuantity(281e-12, SI.F, 'pF')).toBe('281 [pF]');
    expect(formatQuantity(281e-12, SI.F, P)).toBe('281 [pF]');
    expect(formatQuantity(0.02, SI.s, P)).toBe('20 [ms]');
    expect(formatQuantity(1000, dimDiv(SI.V, SI.s), P)).toBe('1000 [mV/ms]'); // 1 V/ms = 1000 mV/ms
    expect(formatQuantity(0.5, DIMENSIONLESS)).toBe('0.5');
    expect(formatQuantity(0.02, SI.s, 'mV')).toBe('0.02 [s]'); // wrong-dimension unit ignored
  });
  test('describeDim', () => {
    expect(describeDim(DIMENSIONLESS)).toBe('dimensionless');
    expect(describeDim(ok('mV/ms').dim, P)).toBe('voltage per time (mV/ms)');
    expect(describeDim(SI.F, P)).toBe('capacitance (pF)');
  });
});
