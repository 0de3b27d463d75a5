// "How far is my dt from the model?" (docs/crosscheck.md, "On the grid"): the scenario run on
// the time grid that generated code uses (server/src/grid/, the semantics of every generated
// target) at dt exactly as generated code runs it, then at dt/2 and dt/4 with the sub-step
// count of dt held (so the sub-step halves too), and every gradient row's relative error
// against the exact gradient of the accurate simulation, with the observed order of
// convergence log2(e(dt) / e(dt/2)). An exact step map (linear time-invariant flows) has
// errors at rounding level at every dt; the others converge at fourth order (ETDRK4) until
// they meet the accurate simulation's own error.
// Invariants: never throws (a grid run that fails becomes `error` of that dt); reads only
// the validated scenario and the exact rows.
import { gridBackward, gridForward, networkFromScenario } from '../grid';
import type { Scenario } from './scenario';
import { type DelayRow, type GradientRow, type GridConvergence, type GridRowConvergence, type ParamRow, rowLabel } from './types';

export type { GridConvergence, GridRowConvergence };

/** Below this relative error the difference is rounding: no order is computed from it. */
const ROUNDING = 1e-11;

export function gridConvergence(s: Scenario, gradients: readonly GradientRow[], params: readonly ParamRow[], exactLoss: number, dt: number,
  delays: readonly DelayRow[] = []): GridConvergence {
  const t0 = performance.now();
  const dts = [dt, dt / 2, dt / 4];
  const net = networkFromScenario(s);
  const out: GridConvergence = { dts, substeps: {}, exact: {}, loss: { values: [], errors: [] }, rows: [], worst: null, failures: [], timing_ms: 0 };
  const rows: GridRowConvergence[] = [
    ...gradients.map((r) => ({ label: rowLabel(r), exact: r.adjoint, values: [], errors: [], orders: [] })),
    ...params.map((r) => ({ label: `${r.population}.${r.name}`, exact: r.adjoint, values: [], errors: [], orders: [] })),
    ...delays.map((r) => ({ label: rowLabel(r), exact: r.adjoint, values: [], errors: [], orders: [] })),
  ];
  const relErr = (v: number | null, exact: number): number | null => (v === null || exact === 0 || !Number.isFinite(v) ? null : Math.abs(v - exact) / Math.abs(exact));
  let held: Record<string, number> | undefined;
  for (const h of dts) {
    let values: (number | null)[] = rows.map(() => null);
    try {
      const run = gridForward(net, { dt: h, ...(held ? { substeps: held } : {}) });
      held ??= { ...run.substeps };
      if (run.errors.length) throw new Error(run.errors.join('; '));
      for (const [pop, m] of Object.entries(run.substeps)) (out.substeps[pop] ??= []).push(m);
      for (const p of s.populations) if (p.kind === 'model') out.exact[p.name] = run.trials[0]?.pops.find((x) => x?.name === p.name)?.kernels.d.exact ?? false;
      const g = gridBackward(run);
      values = [...gradients.map((r) => g.weights[r.projection]?.[r.to]?.[r.from] ?? null), ...params.map((r) => g.params[r.population]?.[r.name] ?? null),
        ...delays.map((r) => (r.shared ? g.delays[r.projection]?.flat().reduce((x, y) => x + y, 0) ?? null : g.delays[r.projection]?.[r.to!]?.[r.from!] ?? null))];
      out.loss.values.push(run.loss);
      out.loss.errors.push(exactLoss === 0 ? null : Math.abs(run.loss - exactLoss) / Math.abs(exactLoss));
    } catch (e) {
      out.failures.push({ dt: h, error: e instanceof Error ? e.message : String(e) });
      out.loss.values.push(null);
      out.loss.errors.push(null);
    }
    rows.forEach((r, k) => { r.values.push(values[k]!); r.errors.push(relErr(values[k]!, r.exact)); });
  }
  for (const r of rows) {
    for (let k = 0; k + 1 < r.errors.length; k++) {
      const a = r.errors[k], b = r.errors[k + 1];
      const o = a !== null && b !== null && a > ROUNDING && b > ROUNDING ? Math.log2(a / b) : null;
      // an error that does not move is the accurate simulation's own (or rounding): no order
      r.orders.push(o !== null && Math.abs(o) >= 0.3 ? o : null);
    }
  }
  out.rows = rows;
  const first = rows.map((r) => r.errors[0]).filter((e): e is number => e !== null && e !== undefined);
  out.worst = first.length ? Math.max(...first) : null;
  out.timing_ms = performance.now() - t0;
  return out;
}
