// The text and JSON faces of a cross-check result. The JSON keeps the contract of
// docs/crosscheck.md (loss, spikes, gradients, params, maxRelativeError) and adds status,
// spike counts, warnings and the rest; traces stay out of it (they are for the page).
// Invariant: JSON numbers are finite or null (JSON has no NaN or Infinity).
import type { GridConvergence } from './grid';
import type { CrossCheckResult } from './types';
import { rowDisplay, rowLabel } from './types';
import { sci } from './svg';

const num = (v: number | null | undefined): number | null => (v === null || v === undefined || !Number.isFinite(v) ? null : v);
/** A number JSON can hold, or the name of what it was (JSON has no NaN or Infinity). */
const nonFiniteName = (v: number): string | null => (Number.isFinite(v) ? null : Number.isNaN(v) ? 'NaN' : v > 0 ? 'Infinity' : '-Infinity');

export function crossCheckJson(r: CrossCheckResult): Record<string, unknown> {
  const row = <T extends { adjoint: number; finiteDifference: number | null; relativeError: number | null; absoluteError: number | null; value: number; step: number | null }>(x: T) =>
    ({ ...x, adjoint: num(x.adjoint), finiteDifference: num(x.finiteDifference), relativeError: num(x.relativeError), absoluteError: num(x.absoluteError), value: num(x.value), step: num(x.step),
      ...(nonFiniteName(x.adjoint) ? { adjointNonFinite: nonFiniteName(x.adjoint) } : {}) });
  return {
    status: r.status,
    passed: r.passed,
    errors: r.errors,
    source: r.source,
    scenario: r.scenario,
    duration_s: r.duration,
    lossKind: r.lossKind,
    loss: num(r.loss),
    lossUnit: r.lossUnit,
    spikes: r.spikes,
    spikeCounts: r.spikeCounts,
    gradients: r.gradients.map((x) => {
      const { projection, to, from, adjoint, finiteDifference, relativeError, ...rest } = row(x);
      return { projection, to, from, adjoint, finiteDifference, relativeError, ...rest };
    }),
    params: r.params.map((x) => {
      const { name, population, adjoint, finiteDifference, relativeError, ...rest } = row(x);
      return { name, population, adjoint, finiteDifference, relativeError, ...rest };
    }),
    ...(r.delays ? { delays: r.delays.map((x) => {
      const { kind: _kind, projection, shared, adjoint, finiteDifference, relativeError, ...rest } = row(x);
      return { projection, shared, adjoint, finiteDifference, relativeError, ...rest };
    }) } : {}),
    maxRelativeError: num(r.maxRelativeError),
    worst: r.worst,
    noiseLimited: r.noiseLimited,
    tolerance: r.tolerance,
    ...(r.sample ? { sample: r.sample } : {}),
    closestToGrazing: r.closestToGrazing,
    spikeSlopeRatios: r.spikeSlopeRatios,
    warnings: r.warnings,
    models: r.models,
    settings: r.settings,
    timing: { ...r.timing, cpu_ms: num(r.timing.cpu_ms) },
    ...(r.grid ? { grid: { ...r.grid, worst: num(r.grid.worst), loss: { values: r.grid.loss.values.map(num), errors: r.grid.loss.errors.map(num) },
      rows: r.grid.rows.map((x) => ({ ...x, exact: num(x.exact), values: x.values.map(num), errors: x.errors.map(num), orders: x.orders.map(num) })) } } : {}),
  };
}

/** The grid section of the text report: error per row at dt, dt/2, dt/4 and the observed order. */
export function gridText(g: GridConvergence): string[] {
  const ms = (dt: number): string => `${Number((dt * 1e3).toPrecision(4))} ms`;
  const out: string[] = ['', `On the time grid of generated code (docs/network-step.md), against the exact gradient above:`];
  for (const [pop, m] of Object.entries(g.substeps)) {
    out.push(`  ${pop}: ${g.exact[pop] ? 'exact map (the exact flow between events at every dt)' : `ETDRK4 map, ${m[0]} sub-step${m[0] === 1 ? '' : 's'} per step at every dt of the study (generated code at ${ms(g.dts[0]!)} takes ${m[0]})`}`);
  }
  const w = Math.max(12, ...g.rows.map((x) => x.label.length));
  out.push(`${'value'.padEnd(w)}  ${g.dts.map((d) => `err @ ${ms(d)}`.padStart(16)).join('')}  ${'order'.padStart(12)}`);
  const ord = (o: (number | null)[]): string => o.map((x) => (x === null ? '-' : x.toFixed(1))).join(' / ');
  const line = (label: string, errs: (number | null)[], orders: (number | null)[]): string =>
    `${label.padEnd(w)}  ${errs.map((e) => sci(e, 2).padStart(16)).join('')}  ${ord(orders).padStart(12)}`;
  const lossOrders = g.loss.errors.slice(0, -1).map((e, k) => { const b = g.loss.errors[k + 1]; return e !== null && b !== null && e > 1e-11 && b > 1e-11 ? Math.log2(e / b) : null; });
  out.push(line('loss', g.loss.errors, lossOrders));
  for (const x of g.rows) out.push(line(x.label, x.errors, x.orders));
  for (const f of g.failures) out.push(`  at ${ms(f.dt)}: ${f.error}`);
  out.push(`largest gradient error at ${ms(g.dts[0]!)}: ${sci(g.worst, 3)} (order: log2 of the error's fall per halving of dt; '-' where the error`);
  out.push(`does not move: it is then the accurate simulation's own error, or rounding)`);
  return out;
}

export function crossCheckText(r: CrossCheckResult): string {
  const out: string[] = [`Gradient cross-check: ${r.source} with ${r.scenario}`];
  if (r.status !== 'ok') {
    out.push(r.status === 'cancelled' ? 'cancelled' : r.status === 'failed' ? 'a simulation failed:' : 'the scenario cannot be checked:');
    for (const e of r.errors) out.push(`  ${e.path}: ${e.message}`);
    return out.join('\n') + '\n';
  }
  out.push(`${r.lossText} = ${sci(r.loss, 7)} [${r.lossUnit}] over ${sci(r.duration * 1e3)} ms`);
  if (r.sample) out.push(`sampled check: ${r.sample.rows} of ${r.sample.of} rows (weights and parameters), seed ${r.sample.seed}`);
  const counts = Object.entries(r.spikeCounts).map(([p, c]) => (!(p in r.spikes) ? `${p} does not fire` : `${p} ${c.reduce((a, b) => a + b, 0)}${c.length > 1 ? ` (${c.join(', ')})` : ''}`));
  out.push(`spikes: ${counts.join('; ') || 'none'}`);
  out.push('');
  const rows = [...r.gradients, ...r.params, ...(r.delays ?? [])];
  const w = Math.max(r.delays?.length ? 26 : 12, ...rows.map((x) => rowLabel(x).length));
  const shown = rows.map((x) => rowDisplay(x, r.lossUnit));
  const vals = shown.map((d) => `${sci(d.value, 6)} ${d.valueUnit}`.trimEnd());
  const units = shown.map((d) => `[${d.gradientUnit}]`);
  const vw = Math.max(5, ...vals.map((v) => v.length)), uw = Math.max(4, ...units.map((v) => v.length));
  out.push(`each gradient is dL/d(value) per the unit the value is shown in (the file's unit; the JSON report is SI)`);
  out.push(`${(r.delays?.length ? 'weight, parameter or delay' : 'weight or parameter').padEnd(w)}  ${'value'.padStart(vw)}  ${'adjoint'.padStart(15)}  ${'finite diff.'.padStart(15)}  ${'unit'.padEnd(uw)}  ${'rel. error'.padStart(10)}`);
  rows.forEach((x, k) => {
    const d = shown[k]!;
    const flag = x.status === 'ok' ? (x.withinNoise ? `  (zero within FD noise ±${sci(d.fdNoise ?? null, 2)})` : '')
      : x.status === 'above-tolerance' ? `  <- above tolerance${d.fdNoise !== undefined ? ` (FD noise ±${sci(d.fdNoise, 2)})` : ''}` : `  (${x.note ?? x.status})`;
    out.push(`${rowLabel(x).padEnd(w)}  ${vals[k]!.padStart(vw)}  ${sci(d.adjoint, 8).padStart(15)}  ${sci(d.finiteDifference, 8).padStart(15)}  ${units[k]!.padEnd(uw)}  ${sci(x.relativeError, 2).padStart(10)}${flag}`);
  });
  out.push('');
  for (const x of rows) if (x.stepBasis) out.push(`${rowLabel(x)} is 0: its step is relative to ${x.stepBasis}`);
  const worst = r.worst ? ` (${r.worst.label})` : '';
  const noise = r.noiseLimited ? `; ${r.noiseLimited} row${r.noiseLimited === 1 ? '' : 's'} agree${r.noiseLimited === 1 ? 's' : ''} only within the finite differences' own noise` : '';
  out.push(`largest relative error ${sci(r.maxRelativeError, 3)}${worst}${noise}, tolerance ${sci(r.tolerance, 2)}: ${r.passed ? 'the adjoint gradient agrees' : 'CHECK FAILED'}`);
  const near = [...r.closestToGrazing].sort((a, b) => a.ratio - b.ratio)[0];
  if (near) out.push(`closest to grazing: ${near.population}[${near.index}] at ${sci(near.time * 1e3, 6)} ms, |gdot| ${pctText(near.ratio)} of its typical guard slope`);
  if (r.warnings.length) {
    out.push('warnings:');
    for (const x of r.warnings) out.push(`  ${x.kind}: ${x.message}`);
  }
  if (r.grid) out.push(...gridText(r.grid));
  out.push(`${r.timing.simulations} simulations in ${r.timing.total_ms.toFixed(0)} ms`);
  return out.join('\n') + '\n';
}

/** A ratio as a percentage with two significant digits. */
export function pctText(x: number): string {
  return `${Number((100 * x).toPrecision(2))} %`;
}
