// Diagnostics of the step analysis of the step map generated code runs (analyse.ts):
// `step-unstable` (error), `step-inaccurate` (warning), `step-linearised` (info; a flow not
// affine in its own state, whose linear part the map freezes over each step). An exact map
// gets neither of the first two. Whole-step findings sit on the `timestep` declaration when the
// caller passes its range, else on the neuron's first flow equation; `step-linearised` sits
// on the flow equation of the state it is about.
// Invariants: pure; no diagnostic for a neuron that is not well formed or for a report whose
// figures are not finite (the report's `problems` say why).
import type { Range } from '../syntax/ast';

import type { Diagnostic } from '../base/diagnostic';

import type { ResolvedNeuron } from '../model/types';

import { formatTime, mapWords } from './report';
import type { StepReport } from './types';


const num = (v: number, digits = 4): string => (Number.isFinite(v) ? String(Number(v.toPrecision(digits))) : String(v));

export function stepDiagnostics(report: StepReport, neuron: ResolvedNeuron, timestepRange?: Range): Diagnostic[] {
  if (!neuron.wellFormed) return [];
  const out: Diagnostic[] = [];
  const firstFlow = [...neuron.flowDecls.values()][0];
  const wholeRange: Range | undefined = timestepRange ?? firstFlow?.range ?? neuron.decl.name?.range ?? neuron.decl.keywordRange;
  const dt = formatTime(report.dt_s);
  const at = `at the ${report.reference.kind === 'rest' ? 'resting state' : 'initial state'}`;

  if (wholeRange && report.unstable && !report.map.exact) {
    const limit = report.maxStableDt_s === null ? '' : ` The step is stable for dt up to ${formatTime(report.maxStableDt_s)}.`;
    out.push({
      severity: 'error', code: 'step-unstable', range: wholeRange,
      message: `${report.neuron}: the step that generated code takes, ${mapWords(report)}, is unstable at dt = ${dt}: ${at} it amplifies a mode by ${num(report.stepRadius)} per step (spectral radius of the step's Jacobian) that the exact linearised flow ${report.exactRadius < 1 ? `damps (spectral radius ${num(report.exactRadius)})` : 'does not amplify'}.${limit}`,
    });
  } else if (wholeRange && !report.map.exact && report.stable && !report.accurate && Number.isFinite(report.relativeStepError)) {
    const within = report.accurateDt_s ? ` dt up to ${formatTime(report.accurateDt_s)} keeps it within the bound.` : '';
    out.push({
      severity: 'warning', code: 'step-inaccurate', range: wholeRange,
      message: `${report.neuron}: at dt = ${dt} one step of the map that generated code takes, ${mapWords(report)}, differs from the exact linearised flow by ${num(report.relativeStepError * 100, 3)} % (||M - P|| / ||P|| ${at}), above the ${num(report.accuracyBound * 100, 3)} % bound.${within}`,
    });
  }
  for (const s of report.states) {
    if (s.kind !== 'linearised') continue;
    const decl = neuron.flowDecls.get(s.name);
    if (!decl) continue;
    out.push({ severity: 'info', code: 'step-linearised', range: decl.range, message: `d${s.name}/dt is ${s.reason}` });
  }
  return out;
}
