// The text and JSON faces of a cross-check result. The JSON keeps the contract of
// docs/crosscheck.md (loss, spikes, gradients, params, maxRelativeError) and adds status,
// spike counts, warnings and the rest; traces stay out of it (they are for the page).
// Invariant: JSON numbers are finite or null (JSON has no NaN or Infinity).
import type { CrossCheckResult } from './types';
import { rowLabel } from './types';
import { sci } from './svg';

const num = (v: number | null | undefined): number | null => (v === null || v === undefined || !Number.isFinite(v) ? null : v);

export function crossCheckJson(r: CrossCheckResult): Record<string, unknown> {
  const row = <T extends { adjoint: number; finiteDifference: number | null; relativeError: number | null; absoluteError: number | null; value: number; step: number | null }>(x: T) =>
    ({ ...x, adjoint: num(x.adjoint), finiteDifference: num(x.finiteDifference), relativeError: num(x.relativeError), absoluteError: num(x.absoluteError), value: num(x.value), step: num(x.step) });
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
    tolerance: r.tolerance,
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
  const counts = Object.entries(r.spikeCounts).map(([p, c]) => (!(p in r.spikes) ? `${p} does not fire` : `${p} ${c.reduce((a, b) => a + b, 0)}${c.length > 1 ? ` (${c.join(', ')})` : ''}`));
  out.push(`spikes: ${counts.join('; ') || 'none'}`);
  out.push('');
  const rows = [...r.gradients, ...r.params];
  const w = Math.max(12, ...rows.map((x) => rowLabel(x).length));
  out.push(`${'value'.padEnd(w)}  ${'adjoint'.padStart(15)}  ${'finite diff.'.padStart(15)}  ${'rel. error'.padStart(10)}`);
  for (const x of rows) {
    const flag = x.status === 'ok' ? '' : x.status === 'above-tolerance' ? '  <- above tolerance' : `  (${x.note ?? x.status})`;
    out.push(`${rowLabel(x).padEnd(w)}  ${sci(x.adjoint, 8).padStart(15)}  ${sci(x.finiteDifference, 8).padStart(15)}  ${sci(x.relativeError, 2).padStart(10)}${flag}`);
  }
  out.push('');
  const worst = r.worst ? ` (${r.worst.label})` : '';
  out.push(`largest relative error ${sci(r.maxRelativeError, 3)}${worst}, tolerance ${sci(r.tolerance, 2)}: ${r.passed ? 'the adjoint gradient agrees' : 'CHECK FAILED'}`);
  if (r.warnings.length) {
    out.push('warnings:');
    for (const x of r.warnings) out.push(`  ${x.kind}: ${x.message}`);
  }
  out.push(`${r.timing.simulations} simulations in ${r.timing.total_ms.toFixed(0)} ms`);
  return out.join('\n') + '\n';
}
