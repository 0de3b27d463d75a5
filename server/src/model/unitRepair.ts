// Unit repairs: when an equation's units do not agree, the mistake is often in one
// parameter's (or state's) unit, not in the equation: `C_m = 200 [nS]` for pF, `[ns]` for
// `[nS]`. For each `unit-mismatch` of a neuron, the units written for the params and states
// the offending expression uses are tried, one at a time:
//   - the unit that supplies what the mismatch lacks (found * wanted/found), written in the
//     file's units and, where it is one, as a prefixed SI symbol (nS * ms = pF);
//   - the same symbols with one letter's case changed (`ns` -> `nS`).
// A candidate is kept when re-resolving the neuron with it repairs every mismatch that uses
// that declaration and adds no error. The mismatch then says so first ("the unit of 'C_m'
// looks wrong ..."), and its fixes are ranked by how many mismatches they repair (a change of
// unit first on a tie, since it repairs every equation that uses the declaration).
// Invariants: never throws; bounded (at most MAX_PROBES re-resolutions per neuron); only
// diagnostics of this neuron are changed, and only by adding to the message and the fixes.
import type * as A from '../syntax/ast';
import type { Diagnostic, Fix } from '../base/diagnostic';
import { DIMENSIONLESS, dimDiv, dimEqual, dimMul, isDimensionless, type Dim } from '../units/dimension';
import { parseUnit } from '../units/unitParse';
import { describeDim, formatDim } from '../units/format';

/** Most re-resolutions of one neuron tried (each is one resolve of that neuron alone). */
const MAX_PROBES = 48;

/** A place where a unit is written for a declaration: a param's literal value or a state's unit. */
interface Site {
  name: string;
  kind: 'param' | 'state';
  /** The unit text as written (undefined for a number without a unit). */
  unit?: string;
  /** The literal (`200`, `-70.6`) whose unit it is, for messages. */
  value?: string;
  /** Where the unit text is (or where ` [unit]` would be inserted). */
  range: A.Range;
  insert: boolean;
  dim?: Dim;
  /** The declaration with another unit text. */
  replace(decl: A.NeuronDecl, text: string): A.NeuronDecl;
}

export interface RepairInput {
  decl: A.NeuronDecl;
  /** This neuron's diagnostics (changed in place). */
  diagnostics: Diagnostic[];
  ratios: Map<Diagnostic, Dim>;
  /** This neuron's references: which declaration each name in the text resolves to. */
  references: readonly { range: A.Range; target: { name: string; kind: string; dim?: Dim } }[];
  unitsUsed: readonly string[];
  /** The errors of the neuron resolved again from another declaration. */
  probe(decl: A.NeuronDecl): Diagnostic[];
}

interface Repair { site: Site; text: string; dim: Dim; repaired: Diagnostic[]; caseOnly: boolean }

export function repairUnits(input: RepairInput): void {
  const mismatches = input.diagnostics.filter((d) => d.code === 'unit-mismatch' && d.severity === 'error' && input.ratios.has(d));
  if (mismatches.length === 0) return;
  const sites = unitSites(input.decl);
  const errors = input.diagnostics.filter((d) => d.severity === 'error');
  const key = (d: Diagnostic): string => `${d.code}@${d.range.start}:${d.range.end}`;
  const before = new Set(errors.map(key));
  const usesOf = new Map<string, Diagnostic[]>();
  for (const d of mismatches) for (const n of namesIn(d, input)) { if (!usesOf.has(n)) usesOf.set(n, []); usesOf.get(n)!.push(d); }

  const repairs: Repair[] = [];
  let probes = 0;
  for (const [name, uses] of usesOf) {
    const site = sites.get(name);
    if (!site?.dim) continue;
    for (const c of candidates(site, uses.map((d) => input.ratios.get(d)!), input.unitsUsed)) {
      if (++probes > MAX_PROBES) break;
      let after: Diagnostic[];
      try { after = input.probe(site.replace(input.decl, c.text)).filter((d) => d.severity === 'error'); } catch { continue; }
      if (after.some((d) => !before.has(key(d)))) continue; // it must add no error
      const left = new Set(after.map(key));
      if (uses.some((d) => left.has(key(d)))) continue; // every equation that uses it must agree
      repairs.push({ site, text: c.text, dim: c.dim, caseOnly: c.caseOnly, repaired: mismatches.filter((d) => !left.has(key(d))) });
    }
  }
  if (repairs.length === 0) return;
  repairs.sort((x, y) => y.repaired.length - x.repaired.length || Number(y.caseOnly) - Number(x.caseOnly));
  // one repair per declaration: its best (a letter-case slip keeps the number's scale, so it goes first)
  const best = repairs.filter((r, i) => repairs.findIndex((o) => o.site === r.site) === i);
  for (const d of mismatches) {
    const mine = best.filter((r) => r.repaired.includes(d)).slice(0, 2);
    if (mine.length === 0) continue;
    const top = mine[0]!;
    d.message = `${repairSentence(top, input.unitsUsed)} In this equation: ${d.message}`;
    d.related = [...(d.related ?? []), { message: `the unit of '${top.site.name}'`, range: top.site.range }];
    const ranked: { fix: Fix; count: number; unit: boolean }[] = [
      ...mine.map((r) => ({ fix: unitFix(r), count: r.repaired.length, unit: true })),
      ...(d.fixes ?? []).map((fix) => ({ fix, count: 1, unit: false })),
    ];
    ranked.sort((x, y) => y.count - x.count || Number(y.unit) - Number(x.unit));
    d.fixes = ranked.map((r, i) => ({ ...r.fix, preferred: i === 0 }));
  }
}

/** "the unit of 'C_m' looks wrong: 200 [nS] is a conductance; as 200 [pF], a capacitance, ..." */
function repairSentence(r: Repair, unitsUsed: readonly string[]): string {
  const n = r.repaired.length;
  const agree = n === 1 ? `the equation that uses '${r.site.name}' agrees` : `all ${n} equations that use '${r.site.name}' agree`;
  const was = r.site.unit;
  const value = r.site.value ?? '1';
  const oldWords = r.site.dim ? quantityWords(r.site.dim, was ? [was] : [...unitsUsed]) : '';
  const newWords = quantityWords(r.dim, [r.text]);
  if (r.caseOnly) {
    return `'${r.site.name} = ${value} [${was}]' is ${oldWords}: did you mean [${r.text}]${newWords ? `, ${newWords}` : ''}? With ${value} [${r.text}] ${agree}.`;
  }
  const written = was ? `${value} [${was}] is ${oldWords || 'this unit'}` : `${value} is dimensionless`;
  return `the unit of '${r.site.name}' looks wrong: ${written}; as ${value} [${r.text}]${newWords ? `, ${newWords},` : ''} ${agree}.`;
}

/** 'a capacitance', 'a time', or '' when the dimension has no name of its own. */
function quantityWords(dim: Dim, preferred: readonly string[]): string {
  if (isDimensionless(dim)) return 'dimensionless';
  const words = describeDim(dim, preferred);
  const m = /^(.*) \([^()]*\)$/.exec(words);
  return m ? `${article(m[1]!)}${m[1]}` : '';
}

const article = (words: string): string => (words === 'dimensionless' ? '' : /^[aeiou]/i.test(words) ? 'an ' : 'a ');

function unitFix(r: Repair): Fix {
  const n = r.repaired.length;
  return { title: `Change the unit of '${r.site.name}' to [${r.text}] (repairs ${n} equation${n === 1 ? '' : 's'})`,
    edits: [{ range: r.site.range, newText: r.site.insert ? ` [${r.text}]` : r.text }] };
}

/** The declarations whose names the offending expression (and its other side) uses, lets followed once. */
function namesIn(d: Diagnostic, input: RepairInput): Set<string> {
  const ranges = [d.range, ...(d.related ?? []).map((r) => r.range)];
  const inside = (r: A.Range): boolean => ranges.some((x) => r.start >= x.start && r.end <= x.end);
  const out = new Set<string>();
  const lets = new Map<string, A.Range>();
  for (const m of input.decl.members) if (m.kind === 'let' && m.value) lets.set(m.name.name, m.value.range);
  for (const ref of input.references) {
    if (!inside(ref.range)) continue;
    out.add(ref.target.name);
    const letRange = ref.target.kind === 'let' ? lets.get(ref.target.name) : undefined;
    if (letRange) for (const inner of input.references) if (inner.range.start >= letRange.start && inner.range.end <= letRange.end) out.add(inner.target.name);
  }
  return out;
}

/** The number literal of a param's value (also under a sign or parentheses). */
function literal(e: A.Expr | undefined): A.NumberExpr | undefined {
  if (!e) return undefined;
  if (e.kind === 'number') return e;
  if (e.kind === 'unary') return literal(e.operand);
  if (e.kind === 'paren') return literal(e.inner);
  return undefined;
}

function withUnit(e: A.Expr, text: string): A.Expr {
  if (e.kind === 'number') return { ...e, unit: { text, range: e.unit?.range ?? { start: e.range.end, end: e.range.end } } };
  if (e.kind === 'unary') return { ...e, operand: withUnit(e.operand, text) };
  if (e.kind === 'paren') return { ...e, inner: withUnit(e.inner, text) };
  return e;
}

function unitSites(decl: A.NeuronDecl): Map<string, Site> {
  const sites = new Map<string, Site>();
  const replaceMember = (d: A.NeuronDecl, target: A.Member, next: A.Member): A.NeuronDecl => ({ ...d, members: d.members.map((m) => (m === target ? next : m)) });
  for (const m of decl.members) {
    if (m.kind === 'param' && m.value) {
      const lit = literal(m.value);
      if (!lit) continue;
      const u = lit.unit ? parseUnit(lit.unit.text) : undefined;
      if (u && !u.ok) continue;
      const value = m.value.kind === 'unary' && m.value.op === '-' ? `-${lit.raw}` : lit.raw;
      sites.set(m.name.name, { name: m.name.name, kind: 'param', ...(lit.unit ? { unit: lit.unit.text } : {}), value,
        range: lit.unit ? lit.unit.range : { start: lit.range.end, end: lit.range.end }, insert: !lit.unit,
        ...(u?.ok ? { dim: u.dim } : lit.unit ? {} : { dim: DIMENSIONLESS }),
        replace: (d, text) => replaceMember(d, m, { ...m, value: withUnit(m.value!, text) }) });
    } else if (m.kind === 'state' && m.unit) {
      const u = parseUnit(m.unit.text);
      if (!u.ok) continue;
      const lit = literal(m.initial);
      sites.set(m.name.name, { name: m.name.name, kind: 'state', unit: m.unit.text, ...(lit ? { value: lit.raw } : {}), range: m.unit.range, insert: false, dim: u.dim,
        replace: (d, text) => replaceMember(d, m, { ...m, unit: { ...m.unit!, text }, ...(m.initial && lit?.unit ? { initial: withUnit(m.initial, text) } : {}) }) });
    }
  }
  return sites;
}

interface Candidate { text: string; dim: Dim; caseOnly: boolean }

/** Unit texts worth trying at a site: what each mismatch lacks, and one-letter case changes. */
function candidates(site: Site, ratios: Dim[], unitsUsed: readonly string[]): Candidate[] {
  const out: Candidate[] = [];
  const add = (text: string, caseOnly: boolean): void => {
    const u = parseUnit(text);
    if (!u.ok || isDimensionless(u.dim) || (site.dim && dimEqual(u.dim, site.dim)) || out.some((c) => c.text === text)) return;
    out.push({ text, dim: u.dim, caseOnly });
  };
  if (site.unit) for (const v of caseVariants(site.unit)) add(v, true);
  for (const r of ratios) {
    if (isDimensionless(r)) continue;
    for (const dir of [1, -1]) {
      const dim = dir === 1 ? dimMul(site.dim!, r) : dimDiv(site.dim!, r);
      if (isDimensionless(dim)) continue;
      const rText = formatDim(r, unitsUsed);
      const composed = site.unit ? `(${site.unit})${dir === 1 ? '*' : '/'}(${rText})` : dir === 1 ? `(${rText})` : `1/(${rText})`;
      const c = parseUnit(composed);
      if (!c.ok) continue;
      add(prettyUnit(c.dim, c.scale, unitsUsed) ?? c.canonical, false);
    }
  }
  return out;
}

/** `ns` -> `nS`, `Ns`, `NS`...: every symbol with one letter's case changed. */
function caseVariants(text: string): string[] {
  const out: string[] = [];
  for (const m of text.matchAll(/[A-Za-z]+/g)) {
    const sym = m[0], at = m.index!;
    for (let i = 0; i < sym.length; i++) {
      const c = sym[i]!;
      const flipped = c === c.toLowerCase() ? c.toUpperCase() : c.toLowerCase();
      out.push(text.slice(0, at + i) + flipped + text.slice(at + i + 1));
    }
  }
  return out;
}

const NAMED = ['s', 'V', 'A', 'S', 'F', 'Ohm', 'C', 'mol', 'M', 'm', 'g', 'K', 'W', 'J', 'N'];
const PREFIXES = ['', 'k', 'M', 'G', 'm', 'u', 'n', 'p', 'f'];

/** A unit of this dimension and SI scale: a prefixed SI symbol (pF), else the file's units, else undefined. */
function prettyUnit(dim: Dim, scale: number, unitsUsed: readonly string[]): string | undefined {
  const same = (text: string): boolean => { const u = parseUnit(text); return u.ok && dimEqual(u.dim, dim) && Math.abs(u.scale / scale - 1) < 1e-9; };
  for (const p of PREFIXES) for (const s of NAMED) if (same(p + s)) return p + s;
  const own = formatDim(dim, unitsUsed);
  return same(own) ? own : undefined;
}
