// Diagnostics from a derivation: a guard slope that is identically 0 (error: nothing is
// derived), grazing crossings (info: every threshold model has a grazing set; the
// cross-check warns where a run actually comes near it), kinks of abs/min/max (warning),
// vanishing denominators (info) and budget fallbacks (info), each placed on the text of the
// equation it is about (the abs/min/max call itself where the equation has exactly one);
// then what the parameter values say about the guard (guardFacts.ts). The derivation is
// range-free (cached by content); ranges come from the current neuron, so an edit
// elsewhere in the file moves them correctly.
// Invariant: never throws; every range lies inside the neuron's declaration.
import type * as A from '../syntax/ast';
import type { Diagnostic, Severity } from '../base/diagnostic';
import type { ResolvedNeuron } from '../model/types';
import { NON_SMOOTH } from '../symbolic/sym';
import type { DerivationIssue, NeuronDerivation, Where } from './derive';
import { guardDiagnostics } from './guardFacts';

const SEVERITY: Record<DerivationIssue['code'], Severity> = {
  'zero-guard-slope': 'error',
  'fires-only-by-jumps': 'info',
  'grazing-crossing': 'info',
  'non-smooth': 'warning',
  'vanishing-denominator': 'info',
  'derivation-budget': 'info',
};

function span(a: A.Range, b: A.Range): A.Range { return { start: Math.min(a.start, b.start), end: Math.max(a.end, b.end) }; }

/** Calls of abs/min/max inside an expression, in text order. */
function nonSmoothCalls(e: A.Expr | undefined, out: A.CallExpr[] = []): A.CallExpr[] {
  if (!e) return out;
  switch (e.kind) {
    case 'call':
      if ((NON_SMOOTH as readonly string[]).includes(e.callee.name)) out.push(e);
      e.args.forEach((a) => nonSmoothCalls(a, out));
      break;
    case 'unary': nonSmoothCalls(e.operand, out); break;
    case 'binary': nonSmoothCalls(e.left, out); nonSmoothCalls(e.right, out); break;
    case 'paren': nonSmoothCalls(e.inner, out); break;
    default: break;
  }
  return out;
}

interface Place { range: A.Range; exprs: (A.Expr | undefined)[] }

function place(where: Where, n: ResolvedNeuron): Place {
  if (where.kind === 'flow') {
    const f = n.flowDecls.get(where.state);
    if (f) return { range: f.range, exprs: [f.value] };
    const s = n.states.find((x) => x.name === where.state);
    return { range: s?.nameRange ?? n.symbol.nameRange, exprs: [] };
  }
  if (where.kind === 'fire' && n.fire) {
    const d = n.fire.decl;
    let head = d.keywordRange;
    for (const r of [d.lhs?.range, d.rhs?.range, d.directionRange]) if (r) head = span(head, r);
    return { range: head, exprs: [d.lhs, d.rhs, ...d.jumps.map((j) => j.value)] };
  }
  const inc = where.kind === 'incoming' ? n.receptors.find((r) => where.weight === undefined || r.weight === where.weight) : undefined;
  if (inc) {
    const d = inc.decl;
    let head = d.keywordRange;
    for (const r of [d.weight?.range, d.unit?.range]) if (r) head = span(head, r);
    return { range: head, exprs: d.jumps.map((j) => j.value) };
  }
  return { range: n.symbol.nameRange, exprs: [] };
}

export function adjointDiagnostics(derivation: NeuronDerivation, neuron: ResolvedNeuron): Diagnostic[] {
  const out: Diagnostic[] = [];
  try {
    for (const issue of derivation.issues) {
      const p = place(issue.where, neuron);
      let range = issue.code === 'derivation-budget' ? neuron.symbol.nameRange : p.range;
      if (issue.code === 'non-smooth') {
        const calls = p.exprs.flatMap((e) => nonSmoothCalls(e));
        if (calls.length === 1) range = calls[0]!.range;
      }
      out.push({ severity: SEVERITY[issue.code], code: issue.code, message: issue.message, range });
    }
    out.push(...guardDiagnostics(derivation, neuron));
  } catch {
    // A neuron whose declarations changed shape under us: report nothing rather than throw.
  }
  return out;
}
