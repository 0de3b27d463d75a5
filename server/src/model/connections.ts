// Projections between neuron models: declared `connect A -> B (via W)?`, or, when the file
// declares none, the implicit self-projection of every model that both fires and receives
// spikes, one per incoming block (docs/language.md "Projections").
// `via W` names the receiving block by its weight: required when B has several blocks,
// optional with one. The same pair may be projected twice with different blocks; twice into
// the same block is a duplicate (an error between receptors; a warning with one block, as in v0).
// A written `delay D` must be a constant time >= 0 (SI seconds in `Connection.delaySI`).
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
    const blocks = to.decl.members.filter((m): m is A.IncomingBlock => m.kind === 'incoming');
    if (blocks.length === 0) {
      ctx.diagnostics.push({ severity: 'error', code: 'invalid-connection', range: c.to.range,
        message: `${to.name} has no 'incoming' block: it cannot receive spikes` });
      ok = false;
    }
    const via = receptorOf(c, to, blocks, ctx);
    if (blocks.length > 0 && via === undefined) ok = false;
    const key = `${from.name}->${to.name}${via !== undefined ? ` via ${via}` : ''}`;
    const prior = seen.get(key);
    if (prior) {
      // v0 (one block): a warning, as before; between receptors: an error (merge the two).
      ctx.diagnostics.push({ severity: blocks.length > 1 ? 'error' : 'warning', code: 'duplicate-declaration', range: c.range,
        message: `${from.name} -> ${to.name}${blocks.length > 1 ? ` via ${via}` : ''} is already connected${blocks.length > 1 ? ': merge the two' : ''}`, related: [{ message: 'first connection', range: prior.range }] });
      continue;
    }
    seen.set(key, c);
    const delaySI = c.delay ? delayOf(c.delay, ctx) : undefined;
    if (c.delay && delaySI === undefined) ok = false;
    if (ok && via !== undefined) out.push({ from: from.name, to: to.name, ...(blocks.length > 1 || c.via ? { via } : {}), decl: c, implicit: false, ...(delaySI !== undefined ? { delaySI } : {}) });
  }
  if (declared.length === 0) {
    for (const n of neurons) {
      if (n.fire) for (const r of n.receptors) out.push({ from: n.name, to: n.name, ...(n.receptors.length > 1 ? { via: r.weight } : {}), implicit: true });
    }
  }
  return out;
}

/** The weight name of the block a connection reaches (undefined, with a diagnostic, when it cannot be told). */
function receptorOf(c: A.ConnectDecl, to: ResolvedNeuron, blocks: A.IncomingBlock[], ctx: LowerContext): string | undefined {
  const names = blocks.flatMap((b) => (b.weight ? [b.weight.name] : []));
  if (c.via) {
    if (names.includes(c.via.name)) {
      const r = to.receptors.find((x) => x.weight === c.via!.name);
      if (r) ctx.references.push({ range: c.via.range, target: r.symbol });
      return c.via.name;
    }
    if (blocks.length > 0) {
      ctx.diagnostics.push(unknownName(c.via.range, `${to.name} has no incoming block with the weight '${c.via.name}' (its blocks: ${names.join(', ')})`,
        suggestions(c.via.name, names)));
    }
    return undefined;
  }
  if (blocks.length > 1) {
    ctx.diagnostics.push({ severity: 'error', code: 'missing-via', range: c.range,
      message: `${to.name} has ${blocks.length} incoming blocks (${names.join(', ')}): say which one receives these spikes with 'via', e.g. 'connect ${c.from?.name ?? 'A'} -> ${to.name} via ${names[0]}'`,
      fixes: names.map((n) => ({ title: `Connect via ${n}`, edits: [{ range: { start: c.to!.range.end, end: c.to!.range.end }, newText: ` via ${n}` }] })) });
    return undefined;
  }
  return names[0];
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
