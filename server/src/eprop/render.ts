// Renderers of an EligibilityDerivation: plain text (CLI), Markdown, LaTeX, hover text, the
// preview's rows, and the JSON contract of docs/eprop.md (`eligibilityJson`).
// Invariants: every EXPR in the JSON is `toMathjs` text, as in the adjoint contract; renderers
// never throw and never change a derivation.
import type { Sym } from '../symbolic/sym';
import { toMathjs } from '../symbolic/print';
import { latexName, toLatex } from '../symbolic/latex';
import { ARRIVAL, PSEUDO, SPIKE, eligibilityName } from '../base/names';
import type { EligibilityDerivation } from './derive';

export type Expr = string;

export interface EligibilityJsonModel {
  name: string;
  /** The grid's step in seconds (the effective timestep), or null when none is set. */
  dt: number | null;
  states: string[];
  step: Record<string, Expr>;
  guard: Expr;
  psi: Expr;
  detaching: string[];
  arrivals: Record<string, Record<string, Expr>>;
  eligibility: Record<string, { update: Record<string, Expr>; trace: Expr }>;
  scheme: string;
  notes: string[];
}
export interface EligibilityJson {
  models: EligibilityJsonModel[];
  /** Neurons with no eligibility traces, and why. */
  notDerived: { name: string; reason: string }[];
}

const byState = (d: EligibilityDerivation, es: Sym[]): Record<string, Expr> => Object.fromEntries(d.states.map((x, i) => [x, toMathjs(es[i]!)]));

export function eligibilityJson(ds: readonly EligibilityDerivation[], dt: number | undefined): EligibilityJson {
  return {
    models: ds.filter((d) => !d.notDerived).map((d) => ({
      name: d.name, dt: dt ?? null, states: [...d.states], step: byState(d, d.step), guard: toMathjs(d.guard), psi: toMathjs(d.psi),
      detaching: [...d.detaching], arrivals: Object.fromEntries(d.receptors.map((r) => [r.weight, byState(d, r.next)])),
      eligibility: Object.fromEntries(d.quantities.map((q) => [q.name, { update: byState(d, q.update), trace: toMathjs(q.trace) }])),
      scheme: d.scheme, notes: [...d.notes],
    })),
    notDerived: ds.filter((d) => d.notDerived).map((d) => ({ name: d.name, reason: d.notDerived! })),
  };
}

const CONVENTION = 'one grid step: spike test z = H(g) on the state at the start, the spike jump where z = 1, the flow over dt, then arrivals (z_pre = 1)';

export function renderEligibilityText(d: EligibilityDerivation): string {
  const out = [`Eligibility traces of ${d.name} (e-prop; ${CONVENTION})`];
  if (d.notDerived) return `${out[0]}\n  none: ${d.notDerived}`;
  out.push(`  guard g = ${toMathjs(d.guard)}`, `  ${PSEUDO} = dz/dg = ${toMathjs(d.psi)}`,
    `  detaching: ${d.detaching.join(', ') || '(none)'}`, `Step (${d.scheme} map, ${SPIKE} symbolic):`);
  d.states.forEach((x, i) => out.push(`  ${x}(t+dt) = ${toMathjs(d.step[i]!)}`));
  for (const r of d.receptors) {
    out.push(`After one arrival (weight ${r.weight}${d.receptors.length > 1 ? `; ${r.arrival} = 1` : ''}):`);
    d.states.forEach((x, i) => out.push(`  ${x}+ = ${toMathjs(r.next[i]!)}`));
  }
  for (const q of d.quantities) {
    out.push(`Eligibility of ${q.kind} ${q.name}:`);
    d.states.forEach((x, i) => out.push(`  ${eligibilityName(x)}(t+1) = ${toMathjs(q.update[i]!)}`));
    out.push(`  e(t) = ${toMathjs(q.trace)}`);
  }
  out.push(...d.notes.map((n) => `note: ${n}`));
  return out.join('\n');
}

export function renderEligibilityMarkdown(d: EligibilityDerivation): string {
  const c = (s: Sym): string => '`' + toMathjs(s) + '`';
  const out = [`### Eligibility traces of ${d.name} (e-prop)`, '', `Convention: ${CONVENTION}.`, ''];
  if (d.notDerived) return [...out, `None: ${d.notDerived}.`].join('\n');
  out.push(`- guard \`g\` = ${c(d.guard)}`, `- \`${PSEUDO}\` = dz/dg = ${c(d.psi)}`, `- detaching: ${d.detaching.map((x) => '`' + x + '`').join(', ') || 'none'}`);
  for (const q of d.quantities) {
    out.push('', `**Eligibility of the ${q.kind} \`${q.name}\`**`, '');
    d.states.forEach((x, i) => out.push(`- \`${eligibilityName(x)}(t+1)\` = ${c(q.update[i]!)}`));
    out.push(`- \`e(t)\` = ${c(q.trace)}`);
  }
  if (d.notes.length) out.push('', '**Notes**', '', ...d.notes.map((n) => `- ${n}`));
  return out.join('\n');
}

const NAMES: Record<string, string> = { [PSEUDO]: '\\psi', [SPIKE]: 'z', [ARRIVAL]: 'z^{\\mathrm{pre}}' };
export const eligibilityLatex = (s: Sym): string => toLatex(s, (n) => NAMES[n] ?? (n.startsWith('eps_') ? `\\epsilon_{${latexName(n.slice(4))}}` : undefined));
const epsL = (x: string): string => `\\epsilon_{${latexName(x)}}`;

export function renderEligibilityLatex(d: EligibilityDerivation): string {
  if (d.notDerived) return `% ${d.name}: no eligibility traces (${d.notDerived})`;
  const L = eligibilityLatex;
  const rows = [`\\psi &= ${L(d.psi)}`];
  for (const q of d.quantities) {
    d.states.forEach((x, i) => rows.push(`${epsL(x)}^{${latexName(q.name)}}(t+1) &= ${L(q.update[i]!)}`));
    rows.push(`e^{${latexName(q.name)}}(t) &= ${L(q.trace)}`);
  }
  return `\\begin{aligned}\n${rows.join(' \\\\\n')}\n\\end{aligned}`;
}

/** Hover text for a state (its eligibility components), the fire block or the surrogate (psi and every trace). */
export function eligibilityHoverMarkdown(d: EligibilityDerivation, item: { kind: 'state'; name: string } | { kind: 'fire' } | { kind: 'incoming'; weight?: string } | { kind: 'surrogate' }): string | undefined {
  if (d.notDerived) return item.kind === 'surrogate' ? `_e-prop: none: ${d.notDerived}._` : undefined;
  const c = (s: Sym): string => '`' + toMathjs(s) + '`';
  if (item.kind === 'state') {
    const i = d.states.indexOf(item.name);
    if (i < 0) return undefined;
    return [`**e-prop eligibility of ${item.name}** (\`${eligibilityName(item.name)} = d${item.name}/dq\`, one step)`, '',
      ...d.quantities.map((q) => `- for \`${q.name}\`: \`${eligibilityName(item.name)}(t+1)\` = ${c(q.update[i]!)}`)].join('\n');
  }
  if (item.kind === 'incoming') {
    const q = d.quantities.find((x) => x.kind === 'weight' && (item.weight === undefined || x.name === item.weight));
    if (!q) return undefined;
    return [`**e-prop eligibility of the weight \`${q.name}\`** (per synapse; \`z_pre\`: an arrival in the step)`, '',
      ...d.states.map((x, i) => `- \`${eligibilityName(x)}(t+1)\` = ${c(q.update[i]!)}`), `- \`e(t)\` = ${c(q.trace)}`].join('\n');
  }
  return [`**e-prop** (${CONVENTION})`, '', `\`${PSEUDO}\` = dz/dg = ${c(d.psi)}; detaching ${d.detaching.map((x) => '`' + x + '`').join(', ') || 'nothing'}`, '',
    ...d.quantities.map((q) => `- trace of \`${q.name}\`: \`e(t)\` = ${c(q.trace)}`)].join('\n');
}

export interface EligibilityRow { label: string; latex: string; note?: string }
export interface EligibilitySection { title: string; note?: string; rows: EligibilityRow[] }

/** The preview's sections: psi, then per trained quantity its eligibility update and trace. */
export function eligibilitySections(d: EligibilityDerivation): EligibilitySection[] {
  if (d.notDerived) return [];
  const L = eligibilityLatex;
  const out: EligibilitySection[] = [{ title: 'e-prop: pseudo-derivative', note: `Convention: ${CONVENTION}. Detaching: ${d.detaching.join(', ') || 'nothing'}.`,
    rows: [{ label: 'ψ', latex: `\\psi = \\frac{\\partial z}{\\partial g} = ${L(d.psi)}` }] }];
  for (const q of d.quantities) {
    out.push({ title: `e-prop: eligibility of the ${q.kind} ${q.name}`,
      ...(q.kind === 'weight' ? { note: 'one vector per synapse; z^pre: whether a presynaptic spike arrived in the step' } : {}),
      rows: [...d.states.map((x, i) => ({ label: `ε_${x}`, latex: `${epsL(x)}(t+1) = ${L(q.update[i]!)}` })),
        { label: 'trace', latex: `e(t) = ${L(q.trace)}` }] });
  }
  return out;
}
