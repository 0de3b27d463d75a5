// Projections between neuron models: declared `connect A -> B`, or, when the file declares
// none, the implicit self-projection of every model that both fires and receives spikes
// (docs/language.md "Projections"). A written `delay D` must be a constant time >= 0 (SI
// seconds in `Connection.delaySI`).
import type * as A from '../syntax/ast';
import { TIME, dimEqual } from '../units/dimension';
import { constantValue, describe, lower, type LowerContext } from './lower';
import { suggestions, unknownName } from './suggest';
import type { Connection, ResolvedNeuron } from './types';

export function resolveConnections(file: A.SourceFile, neurons: ResolvedNeuron[], ctx: LowerContext): Connection[] {
  const byName = new Map(neurons.map((n) => [n.name, n] as const));
  const declared = file.items.filter((i): i is A.ConnectDecl => i.kind === 'connect');
  const out: Connection[] = [];
  const seen = new Map<string, A.ConnectDecl>();
  for (const c of declared) {
    if (!c.from || !c.to) continue;
    const from = endpoint(c.from, byName, ctx);
    const to = endpoint(c.to, byName, ctx);
    if (!from || !to) continue;
    let ok = true;
    if (!from.decl.members.some((m) => m.kind === 'fire')) {
      ctx.diagnostics.push({ severity: 'error', code: 'invalid-connection', range: c.from.range,
        message: `${from.name} has no 'fire when' block: it never emits spikes, so it cannot project` });
      ok = false;
    }
    if (!to.decl.members.some((m) => m.kind === 'incoming')) {
      ctx.diagnostics.push({ severity: 'error', code: 'invalid-connection', range: c.to.range,
        message: `${to.name} has no 'incoming' block: it cannot receive spikes` });
      ok = false;
    }
    const key = `${from.name}->${to.name}`;
    const prior = seen.get(key);
    if (prior) {
      ctx.diagnostics.push({ severity: 'warning', code: 'duplicate-declaration', range: c.range,
        message: `${from.name} -> ${to.name} is already connected`, related: [{ message: 'first connection', range: prior.range }] });
      continue;
    }
    seen.set(key, c);
    const delaySI = c.delay ? delayOf(c.delay, ctx) : undefined;
    if (c.delay && delaySI === undefined) ok = false;
    if (ok) out.push({ from: from.name, to: to.name, decl: c, implicit: false, ...(delaySI !== undefined ? { delaySI } : {}) });
  }
  if (declared.length === 0) {
    for (const n of neurons) if (n.fire && n.incoming) out.push({ from: n.name, to: n.name, implicit: true });
  }
  return out;
}

/** The delay's value in seconds: a constant time >= 0; undefined (with a diagnostic) otherwise. */
function delayOf(e: A.Expr, ctx: LowerContext): number | undefined {
  const v = lower(e, { lookup: () => undefined, names: () => [], constantOnly: 'a delay' }, ctx);
  if (v.dim && !dimEqual(v.dim, TIME)) {
    ctx.diagnostics.push({ severity: 'error', code: 'unit-mismatch', range: e.range,
      message: `a delay must be a time, e.g. 1 [ms]; this one is ${describe(v.dim, ctx)}` });
    return undefined;
  }
  const val = v.sym ? constantValue(v.sym) : undefined;
  if (val === undefined) return undefined;
  if (!(val >= 0)) {
    ctx.diagnostics.push({ severity: 'error', code: 'negative-delay', range: e.range,
      message: `a delay must be a time >= 0 (spikes cannot arrive before they are sent); this one is ${val} s` });
    return undefined;
  }
  return val;
}

function endpoint(id: A.Ident, byName: Map<string, ResolvedNeuron>, ctx: LowerContext): ResolvedNeuron | undefined {
  const n = byName.get(id.name);
  if (n) { ctx.references.push({ range: id.range, target: n.symbol }); return n; }
  ctx.diagnostics.push(unknownName(id.range, `no neuron named '${id.name}' in this file`, suggestions(id.name, byName.keys())));
  return undefined;
}
