// Faces of the step analysis: the JSON of `saltus step --format json` (contract in
// docs/step-analysis.md), the CLI text, and hover markdown.
// Invariants: pure; JSON has only finite numbers or null (NaN and infinities become null);
// every time in JSON is in SI seconds.
import { formatNumber } from '../units/format';
import type { MapSchemeLabel, StepReport } from './types';


export interface StepJsonModel {
  name: string;
  dt_s: number | null;
  reference: 'rest' | 'initial';
  states: Record<string, { scheme: MapSchemeLabel }>;
  stepRadius: number | null;
  exactRadius: number | null;
  relativeStepError: number | null;
  maxStableDt_s: number | null;
  exactPropagator: (number | null)[][] | null;
  /** The step map judged: 'exact' (never unstable or inaccurate) or 'exponential-rk4'. */
  map: MapSchemeLabel;
  /** Sub-steps of the map per grid step of dt_s (1 for an exact map). */
  substeps: number;
  /** The quiet mode's figures (`quiet for`), for a neuron with a quiet period. */
  quiet?: Omit<StepJsonModel, 'name' | 'quiet'>;
}
export interface StepJson { models: StepJsonModel[] }

const fin = (v: number): number | null => (Number.isFinite(v) ? v : null);

export function stepReportJson(reports: readonly StepReport[]): StepJson {
  return {
    models: reports.map((r) => {
      const { name: _name, quiet: _q, ...quiet } = r.quiet ? modelJson(r.quiet) : { name: '' };
      return { ...modelJson(r), ...(r.quiet ? { quiet: quiet as Omit<StepJsonModel, 'name' | 'quiet'> } : {}) };
    }),
  };
}

function modelJson(r: StepReport): StepJsonModel {
  const states: Record<string, { scheme: MapSchemeLabel }> = {};
  for (const s of r.states) states[s.name] = { scheme: s.scheme };
  return {
    name: r.neuron,
    dt_s: fin(r.dt_s),
    reference: r.reference.kind,
    states,
    stepRadius: fin(r.stepRadius),
    exactRadius: fin(r.exactRadius),
    relativeStepError: fin(r.relativeStepError),
    maxStableDt_s: r.maxStableDt_s === null ? null : fin(r.maxStableDt_s),
    exactPropagator: r.exactPropagator ? r.exactPropagator.matrix.map((row) => row.map(fin)) : null,
    map: r.map.scheme,
    substeps: r.map.substeps,
  };
}

const num = (v: number, digits = 6): string => (Number.isFinite(v) ? String(Number(v.toPrecision(digits))) : String(v));
const pct = (v: number): string => (Number.isFinite(v) ? `${num(v * 100, 3)} %` : String(v));

function matrixLines(m: readonly (readonly number[])[], labels: readonly string[], indent: string): string[] {
  const cells = m.map((row) => row.map((v) => num(v)));
  const width = Math.max(1, ...cells.flat().map((c) => c.length));
  const lw = Math.max(1, ...labels.map((l) => l.length));
  return cells.map((row, i) => `${indent}${labels[i]!.padEnd(lw)} [ ${row.map((c) => c.padStart(width)).join('  ')} ]`);
}

function stabilityLine(r: StepReport): string {
  if (r.order.length === 0) return r.stabilityNote;
  const now = r.unstable ? `UNSTABLE at dt = ${formatTime(r.dt_s)}` : r.stable ? `stable at dt = ${formatTime(r.dt_s)}` : '';
  return now ? `${now}; ${r.stabilityNote}` : r.stabilityNote;
}

function accuracyLine(r: StepReport): string {
  if (r.map.exact) return `relative one-step error ||M - P|| / ||P|| = ${num(r.relativeStepError, 3)} (rounding: the map is exact at every dt)`;
  const within = r.relativeStepError <= r.accuracyBound;
  const limit = r.accurateDt_s === null ? 'within the bound at every dt scanned' : `within the bound for dt up to ${formatTime(r.accurateDt_s)}`;
  return `relative one-step error ||M - P|| / ||P|| = ${num(r.relativeStepError, 3)} (${within ? 'within' : 'ABOVE'} the ${pct(r.accuracyBound)} bound); ${limit}`;
}

/** 'the exact solution of the flow' or 'ETDRK4 in 4 sub-steps of 0.025 ms'. */
export function mapWords(r: StepReport): string {
  if (r.map.exact) return 'the exact solution of the flow over any step';
  const m = r.map.substeps;
  return `fourth-order exponential Runge-Kutta (ETDRK4)${m > 1 ? ` in ${m} sub-steps of ${formatTime(r.dt_s / m)}` : ', one step per dt'}`;
}

/** Plain text for `saltus step FILE`. */
export function stepReportText(reports: readonly StepReport[]): string {
  const out: string[] = [];
  for (const r of reports) {
    out.push(...modeText(r, `${r.neuron}  (dt = ${formatTime(r.dt_s)})`));
    if (r.quiet) out.push(...modeText(r.quiet, `${r.neuron} in its quiet period (quiet for: these flows, no threshold)`));
  }
  return out.join('\n');
}

function modeText(r: StepReport, title: string): string[] {
  const out: string[] = [];
  out.push(title);
  out.push(`  step map (what generated code runs): ${mapWords(r)}`);
  out.push(`  reference: ${r.reference.kind} - ${r.reference.note}`);
  out.push('  states:');
  const w = Math.max(...r.states.map((s) => s.name.length), 1);
  for (const s of r.states) out.push(`    ${s.name.padEnd(w)}  ${s.scheme.padEnd(16)}  ${s.reason}`);
  if (r.order.length && !Number.isFinite(r.stepRadius)) {
    out.push('  figures: not assessed');
  } else if (r.order.length) {
    out.push(`  spectral radius: step M ${num(r.stepRadius)}, exact flow P = expm(J dt) ${num(r.exactRadius)}`);
    out.push(`  ${accuracyLine(r)}`);
  }
  out.push(`  stability: ${stabilityLine(r)}`);
  if (r.exactPropagator) {
    out.push(`  exact propagator (${r.exactPropagator.method}; this linear time-invariant flow has one), x(t + dt) = P x(t) + q:`);
    out.push(...matrixLines(r.exactPropagator.matrix, r.exactPropagator.states, '    '));
    if (r.exactPropagator.offset.some((v) => v !== 0)) out.push(`    q = [ ${r.exactPropagator.offset.map((v) => num(v)).join('  ')} ]`);
  } else {
    out.push(`  exact propagator: none (${r.lti.reason})`);
  }
  if (r.crossing) {
    out.push(`  threshold on the grid: ${r.crossing.method}`);
    out.push(`    bound: ${r.crossing.bound}`);
    out.push(r.crossing.probe
      ? `    ${r.crossing.probeNote}: linear interpolation would place the spike within about ${formatTime(r.crossing.probe.timeError_s)} (without interpolation: ${formatTime(r.crossing.gridBound_s)})`
      : `    ${r.crossing.probeNote}`);
  }
  for (const p of r.problems) out.push(`  note: ${p}`);
  out.push('');
  return out;
}

/** Hover markdown: the neuron's summary (on `timestep`), or one state's scheme (on its equation). */
export function stepHoverMarkdown(report: StepReport, stateName?: string): string {
  const r = report;
  const lines: string[] = [];
  const st = stateName !== undefined ? r.states.find((s) => s.name === stateName) : undefined;
  if (st) {
    lines.push(`**Step of \`${st.name}\`** in \`${r.neuron}\`: \`${st.scheme}\``, '', st.reason, '');
    if (r.exactPropagator) {
      const i = r.exactPropagator.states.indexOf(st.name);
      const row = r.exactPropagator.matrix[i]!.map((v, j) => `${num(v)}·${r.exactPropagator!.states[j]}`).join(' + ');
      const q = r.exactPropagator.offset[i]!;
      lines.push(`Exact propagator over dt = ${formatTime(r.dt_s)}${r.map.exact ? ' (what the step map computes)' : ''}: \`${st.name}(t+dt) = ${row}${q !== 0 ? ` + ${num(q)}` : ''}\``, '');
    }
  } else {
    lines.push(`**Step analysis of \`${r.neuron}\`** at dt = ${formatTime(r.dt_s)}: the step map is ${mapWords(r)}`, '');
    for (const s of r.states) lines.push(`- \`${s.name}\`: ${s.scheme}`);
    lines.push('');
  }
  lines.push(`Reference: ${r.reference.kind} (${r.reference.note})`, '');
  if (r.order.length && Number.isFinite(r.stepRadius)) {
    lines.push(`Spectral radius of the step ${num(r.stepRadius, 4)}, of the exact flow ${num(r.exactRadius, 4)}; ${accuracyLine(r)}.`, '');
  }
  lines.push(`Stability: ${stabilityLine(r)}.`);
  if (!st && r.exactPropagator && !r.map.exact) lines.push('', `An exact propagator exists (${r.exactPropagator.method}), but the states are coupled in a cycle, so the step map takes ETDRK4.`);
  if (!st && r.crossing) {
    lines.push('', `Threshold: located on the step map's own path inside the step, to rounding; linear interpolation of the guard between grid values would be off by ${r.crossing.probe
      ? `about ${formatTime(r.crossing.probe.timeError_s)} at the probe crossing`
      : 'up to dt^2 max|g\'\'| / (8 |g\'|)'} (up to ${formatTime(r.crossing.gridBound_s)} without interpolation).`);
  }
  for (const p of r.problems) lines.push('', `Note: ${p}`);
  if (r.quiet) {
    const q = r.quiet;
    const qs = st ? q.states.find((s) => s.name === st.name) : undefined;
    lines.push('', st ? (qs ? `In the quiet period: \`${qs.scheme}\` (${qs.reason})` : '')
      : `**In the quiet period** the step map is ${mapWords(q)}; stability: ${stabilityLine(q)}.`);
  }
  return lines.join('\n');
}

/** A time for messages: '0.1 ms', '0.25 ms', '5 us', '1.5 s'. */
export function formatTime(seconds: number): string {
  if (!Number.isFinite(seconds)) return String(seconds);
  const a = Math.abs(seconds);
  if (a === 0) return '0 s';
  if (a >= 1) return `${formatNumber(seconds, 4)} s`;
  if (a >= 1e-5) return `${formatNumber(seconds * 1e3, 4)} ms`;
  if (a >= 1e-8) return `${formatNumber(seconds * 1e6, 4)} us`;
  return `${formatNumber(seconds * 1e9, 4)} ns`;
}

