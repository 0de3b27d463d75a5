// The slow checks of one neuron (`neuronDerivedDiagnostics`), reused across versions of a
// document while the neuron is unchanged. An incremental re-analysis (incremental.ts) keeps
// the resolved neuron of every block an edit did not touch, the same object with its ranges
// moved; its derived diagnostics depend only on that neuron and the effective dt, so they are
// kept beside it (a WeakMap: they go when the neuron does) and handed out again with their
// ranges moved the same way. After an edit inside one block of a large file, the derived work
// is then that one neuron's, not the file's (docs/performance.md, P1).
//
// Invariants:
// - `reusedNeuronDerivedDiagnostics(a, n)` equals `neuronDerivedDiagnostics(a, n)` (tested on
//   random edits in tests/incremental.test.ts); the kept copy is a snapshot (numbers, not the
//   range objects the syntax tree shares and moves), and every call returns fresh objects.
// - Reuse needs the same neuron object and the same effective dt (value, origin, text, and the
//   file's timestep text). A range inside the file's `timestep` value moves with it; every
//   other range moves with the neuron's name.
import type { Diagnostic } from './base/diagnostic';
import type { Range } from './base/range';
import type { ResolvedNeuron } from './model/types';
import { neuronDerivedDiagnostics, type Analysis } from './pipeline';

interface Kept {
  /** Which dt they were computed at (see timestepKey). */
  timestepKey: string;
  /** The neuron's name offset and the file's timestep value offset when computed. */
  anchor: number;
  timestepAt: number | undefined;
  /** The diagnostics with every range as offsets: [start, end, moves with the timestep]. */
  diagnostics: unknown;
}

const kept = new WeakMap<ResolvedNeuron, Kept>();
/** How often kept diagnostics were handed out again, and how often computed (tests read it). */
export const derivedReuseCount = { reused: 0, computed: 0 };

const keys = new WeakMap<Analysis, string>();

/** The effective dt as reuse compares it, once per analysis (the server asks for every neuron). */
function timestepKey(a: Analysis): string {
  const hit = keys.get(a);
  if (hit !== undefined) return hit;
  const ts = a.timestep;
  const file = a.model.timestepDecl?.value;
  const key = JSON.stringify([ts?.seconds ?? null, ts?.source ?? null, ts?.label ?? null, file ? a.text.slice(file.range.start, file.range.end) : null]);
  keys.set(a, key);
  return key;
}

const isRange = (x: Record<string, unknown>): boolean => typeof x.start === 'number' && typeof x.end === 'number' && Object.keys(x).length === 2;

/** A deep copy of plain data with each range replaced by what `range` makes of it. */
function mapRanges(x: unknown, range: (r: Range) => unknown): unknown {
  if (x === null || typeof x !== 'object') return x;
  if (Array.isArray(x)) return x.map((y) => mapRanges(y, range));
  const o = x as Record<string, unknown>;
  if (isRange(o)) return range(o as unknown as Range);
  const out: Record<string, unknown> = {};
  for (const key of Object.keys(o)) out[key] = mapRanges(o[key], range);
  return out;
}
function mapSnapshots(x: unknown, range: (s: [number, number, boolean]) => Range): unknown {
  if (x === null || typeof x !== 'object') return x;
  if (Array.isArray(x)) {
    if (x.length === 4 && x[0] === RANGE_TAG) return range(x.slice(1) as [number, number, boolean]);
    return x.map((y) => mapSnapshots(y, range));
  }
  const o = x as Record<string, unknown>;
  const out: Record<string, unknown> = {};
  for (const key of Object.keys(o)) out[key] = mapSnapshots(o[key], range);
  return out;
}
const RANGE_TAG = '\u0000range';

/** The kept diagnostics of `n` when they hold at `a`'s dt. */
function keptFor(a: Analysis, n: ResolvedNeuron, tsRange: Range | undefined): Kept | undefined {
  const k = kept.get(n);
  return k && k.timestepKey === timestepKey(a) && (tsRange === undefined) === (k.timestepAt === undefined) ? k : undefined;
}

const fileTimestepRange = (a: Analysis): Range | undefined => (a.timestep?.source === 'file' ? a.timestep.range : undefined);

/** Whether `reusedNeuronDerivedDiagnostics(a, n)` would hand out kept results (cheap) rather than derive. */
export function hasKeptDerivedDiagnostics(a: Analysis, n: ResolvedNeuron): boolean {
  return keptFor(a, n, fileTimestepRange(a)) !== undefined;
}

/** The derived diagnostics of `n` at `a`'s dt: reused (moved) when `n` and the dt are unchanged since the last call. */
export function reusedNeuronDerivedDiagnostics(a: Analysis, n: ResolvedNeuron): Diagnostic[] {
  const key = timestepKey(a);
  const anchor = n.symbol.nameRange.start;
  const tsRange = fileTimestepRange(a);
  const k = keptFor(a, n, tsRange);
  if (k) {
    derivedReuseCount.reused++;
    const dn = anchor - k.anchor, dt = tsRange && k.timestepAt !== undefined ? tsRange.start - k.timestepAt : 0;
    return mapSnapshots(k.diagnostics, ([s, e, withTs]) => ({ start: s + (withTs ? dt : dn), end: e + (withTs ? dt : dn) })) as Diagnostic[];
  }
  derivedReuseCount.computed++;
  const fresh = neuronDerivedDiagnostics(a, n);
  const inTimestep = (r: Range): boolean => tsRange !== undefined && r.start >= tsRange.start && r.end <= tsRange.end;
  kept.set(n, { timestepKey: key, anchor, timestepAt: tsRange?.start,
    diagnostics: mapRanges(fresh, (r) => [RANGE_TAG, r.start, r.end, inTimestep(r)]) });
  return fresh;
}
