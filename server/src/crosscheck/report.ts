// The text and JSON faces of a cross-check result. The JSON keeps the contract of
// docs/crosscheck.md (loss, spikes, gradients, params, maxRelativeError) and adds status,
// spike counts, warnings and the rest; traces stay out of it (they are for the page).
// Invariant: JSON numbers are finite or null (JSON has no NaN or Infinity).
import type { CrossCheckResult } from './types';
import { rowLabel } from './types';
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
  };
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
  const rows = [...r.gradients, ...r.params];
  const w = Math.max(12, ...rows.map((x) => rowLabel(x).length));
  out.push(`${'value'.padEnd(w)}  ${'adjoint'.padStart(15)}  ${'finite diff.'.padStart(15)}  ${'rel. error'.padStart(10)}`);
  for (const x of rows) {
    const flag = x.status === 'ok' ? (x.withinNoise ? `  (zero within FD noise ±${sci(x.fdNoise ?? null, 2)})` : '')
      : x.status === 'above-tolerance' ? `  <- above tolerance${x.fdNoise !== undefined ? ` (FD noise ±${sci(x.fdNoise, 2)})` : ''}` : `  (${x.note ?? x.status})`;
    out.push(`${rowLabel(x).padEnd(w)}  ${sci(x.adjoint, 8).padStart(15)}  ${sci(x.finiteDifference, 8).padStart(15)}  ${sci(x.relativeError, 2).padStart(10)}${flag}`);
  }
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
  out.push(`${r.timing.simulations} simulations in ${r.timing.total_ms.toFixed(0)} ms`);
  return out.join('\n') + '\n';
}

/** A ratio as a percentage with two significant digits. */
export function pctText(x: number): string {
  return `${Number((100 * x).toPrecision(2))} %`;
}
