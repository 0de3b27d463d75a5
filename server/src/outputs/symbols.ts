// The document outline: timestep, neurons (with their params, states, lets, equations,
// fire and incoming blocks) and connections, from the syntax tree so that it also shows
// what a half-written file already has. Details come from the resolved model (units).
//
// Invariant: every child's range lies inside its parent's, and selectionRange inside range.
import type { Analysis } from '../pipeline';
import type * as A from '../syntax/ast';
import { describeDim } from '../units/index';
import { exprText } from './exprText';

export type OutlineKind = 'timestep' | 'neuron' | 'param' | 'state' | 'let' | 'equation' | 'fire' | 'incoming' | 'connect';

export interface OutlineSymbol {
  name: string;
  kind: OutlineKind;
  detail?: string;
  range: A.Range;
  selectionRange: A.Range;
  children: OutlineSymbol[];
}

const within = (inner: A.Range, outer: A.Range): A.Range => {
  const start = Math.max(outer.start, Math.min(inner.start, outer.end));
  return { start, end: Math.max(start, Math.min(inner.end, outer.end)) };
};

export function documentSymbols(a: Analysis): OutlineSymbol[] {
  const out: OutlineSymbol[] = [];
  for (const item of a.parse.file.items) {
    if (item.kind === 'timestep') {
      out.push({ name: 'timestep', kind: 'timestep', ...(item.value ? { detail: exprText(item.value) } : {}),
        range: item.range, selectionRange: within(item.keywordRange, item.range), children: [] });
    } else if (item.kind === 'connect') {
      if (!item.from || !item.to) continue;
      out.push({ name: `${item.from.name} -> ${item.to.name}`, kind: 'connect', range: item.range,
        selectionRange: within({ start: item.from.range.start, end: item.to.range.end }, item.range), children: [] });
    } else if (item.name) {
      out.push({ name: item.name.name, kind: 'neuron', ...(item.doc ? { detail: item.doc.text } : {}), range: item.range,
        selectionRange: within(item.name.range, item.range), children: item.members.map((m) => member(a, m, item)).filter((x): x is OutlineSymbol => !!x) });
    }
  }
  return out;
}

function member(a: Analysis, m: A.Member, n: A.NeuronDecl): OutlineSymbol | undefined {
  const range = within(m.range, n.range);
  const sel = (r: A.Range): A.Range => within(r, range);
  switch (m.kind) {
    case 'param': case 'state': case 'let': {
      const info = a.model.symbols.find((s) => s.nameRange.start === m.name.range.start);
      const unit = info?.dim ? describeDim(info.dim, info.unitText ? [info.unitText, ...a.model.unitsUsed] : a.model.unitsUsed) : undefined;
      const trainable = m.kind === 'param' && m.trainable ? 'trainable' : undefined;
      const detail = [unit, trainable].filter(Boolean).join(' · ');
      return { name: m.name.name, kind: m.kind, ...(detail ? { detail } : {}), range, selectionRange: sel(m.name.range), children: [] };
    }
    case 'flow':
      return { name: `d${m.target.name}/dt`, kind: 'equation', ...(m.value ? { detail: exprText(m.value) } : {}),
        range, selectionRange: sel(m.derivRange), children: [] };
    case 'fire': {
      const detail = m.lhs && m.rhs ? `${exprText(m.lhs)} crosses ${exprText(m.rhs)}${m.direction ? ' ' + m.direction : ''}` : undefined;
      return { name: 'fire', kind: 'fire', ...(detail ? { detail } : {}), range, selectionRange: sel(m.keywordRange), children: jumps(m.jumps, range) };
    }
    case 'incoming':
      return { name: `incoming ${m.weight?.name ?? ''}`.trim(), kind: 'incoming', range, selectionRange: sel(m.weight?.range ?? m.keywordRange),
        children: jumps(m.jumps, range) };
  }
}

function jumps(js: A.Jump[], parent: A.Range): OutlineSymbol[] {
  return js.map((j) => ({ name: `${j.target.name} :=`, kind: 'equation' as const, ...(j.value ? { detail: exprText(j.value) } : {}),
    range: within(j.range, parent), selectionRange: within(j.target.range, within(j.range, parent)), children: [] }));
}
