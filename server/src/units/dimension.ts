// Dimension algebra over the SI base quantities, used by the unit checks.
//
// A `Dim` is a frozen array of 9 exponents in the order of mathjs `Unit.BASE_DIMENSIONS`
// (MASS, LENGTH, TIME, CURRENT, TEMPERATURE, LUMINOUS_INTENSITY, AMOUNT_OF_SUBSTANCE,
// ANGLE, BIT). Exponents are JS numbers so that rational powers (sqrt gives halves) work.
// Invariants: every Dim returned here has length 9, is frozen, holds finite numbers, and
// has exponents within 1e-9 of an integer snapped to that integer (no -0, no 0.9999999).

export type Dim = readonly number[];

/** Names of the base quantities, index i names component i of a Dim. */
export const BASE_DIMENSION_NAMES: readonly string[] = Object.freeze([
  'MASS',
  'LENGTH',
  'TIME',
  'CURRENT',
  'TEMPERATURE',
  'LUMINOUS_INTENSITY',
  'AMOUNT_OF_SUBSTANCE',
  'ANGLE',
  'BIT',
]);

export const DIM_LENGTH = 9;

/** Tolerance for comparing exponents (rational exponents come from floating point). */
export const DIM_TOLERANCE = 1e-9;

function snap(x: number): number {
  const r = Math.round(x);
  const v = Math.abs(x - r) <= DIM_TOLERANCE ? r : x;
  return v === 0 ? 0 : v; // turns -0 into 0
}

/** Builds a frozen, snapped Dim from up to 9 exponents (missing ones are 0). */
function build(values: readonly number[]): Dim {
  const out: number[] = new Array<number>(DIM_LENGTH);
  for (let i = 0; i < DIM_LENGTH; i++) out[i] = snap(values[i] ?? 0);
  return Object.freeze(out);
}

/**
 * Makes a Dim from exponents keyed by base-quantity name, e.g. `{ LENGTH: 1, TIME: -1 }`.
 * Unknown names are ignored; use BASE_DIMENSION_NAMES for the valid ones.
 */
export function dimFromExponents(exponents: Readonly<Record<string, number>>): Dim {
  return build(BASE_DIMENSION_NAMES.map((name) => exponents[name] ?? 0));
}

/** Makes a Dim from an array in BASE_DIMENSION_NAMES order (shorter arrays are padded with 0). */
export function dimFromArray(values: readonly number[]): Dim {
  return build(values);
}

/** True when `x` is an array of 9 finite numbers (a usable Dim). */
export function isValidDim(x: unknown): x is Dim {
  return (
    Array.isArray(x) &&
    x.length === DIM_LENGTH &&
    x.every((v) => typeof v === 'number' && Number.isFinite(v))
  );
}

export const DIMENSIONLESS: Dim = build([]);
export const MASS: Dim = dimFromExponents({ MASS: 1 });
export const LENGTH: Dim = dimFromExponents({ LENGTH: 1 });
export const TIME: Dim = dimFromExponents({ TIME: 1 });
export const CURRENT: Dim = dimFromExponents({ CURRENT: 1 });

/** Product of two quantities: exponents add. */
export function dimMul(a: Dim, b: Dim): Dim {
  return build(a.map((v, i) => v + (b[i] ?? 0)));
}

/** Quotient a / b: exponents subtract. */
export function dimDiv(a: Dim, b: Dim): Dim {
  return build(a.map((v, i) => v - (b[i] ?? 0)));
}

/** Power a^k for a real k (k = 0.5 for sqrt): exponents scale by k. */
export function dimPow(a: Dim, k: number): Dim {
  return build(a.map((v) => v * k));
}

/** Equal exponent by exponent, to within DIM_TOLERANCE. */
export function dimEqual(a: Dim, b: Dim): boolean {
  for (let i = 0; i < DIM_LENGTH; i++) {
    if (!(Math.abs((a[i] ?? 0) - (b[i] ?? 0)) <= DIM_TOLERANCE)) return false;
  }
  return true;
}

export function isDimensionless(a: Dim): boolean {
  return dimEqual(a, DIMENSIONLESS);
}

/** A stable string key for maps and caches (exponents rounded to 1e-9). */
export function dimKey(a: Dim): string {
  return a.map((v) => (Math.round(v * 1e9) / 1e9).toString()).join(',');
}
