// The C99 target: <model>.h (types and prototypes) and <model>.c (the phases as loops over
// n neurons). Double by default, float with --float; parameters in a struct unless inlined.
// Invariants: compiles with gcc -std=c99 -O2 -Wall -Wextra -Werror -pedantic; no allocation,
// no globals; every block is commented with the equation it implements (cphases.ts).
import { cComment } from './escape';
import { type CFlavour } from './cexpr';
import { CPhases, type PhaseCode } from './cphases';
import { blockComment, defaultsAndPrepare, helpers, prototypes, structDefinitions, wrapCall } from './cfiles';
import { type HeaderOptions, headerLines } from './header';
import type { ModelPlan } from './plan';

export interface GeneratedFile { name: string; content: string }

export type HeaderBase = Omit<HeaderOptions, 'file' | 'target' | 'precision' | 'esc'>;

export function phasePrototype(plan: ModelPlan, ph: PhaseCode, ret = 'void'): string[] {
  return wrapCall(`${ret} ${plan.prefix}_${ph.name}`, ph.params.map((p) => p.decl), '');
}

function cFunction(plan: ModelPlan, ph: PhaseCode): string[] {
  const voids = unused(ph);
  return [...blockComment(ph.doc), ...phasePrototype(plan, ph), '{',
    ...[...ph.setup, ...voids].map((l) => `    ${l}`),
    '    for (int idx = 0; idx < n_neurons; idx++) {',
    ...ph.body.map((l) => `        ${l.replace(/\bSKIP$/, 'continue;')}`), '    }', '}', ''];
}

/** `(void)x;` for parameters the setup and body never mention. */
export function unused(ph: PhaseCode): string[] {
  const code = [...ph.setup, ...ph.body].filter((l) => !/^\s*(\/\*|\*)/.test(l)).map((l) => l.replace(/\/\*.*?\*\//g, '')).join('\n');
  return ph.params.map((p) => p.name).filter((n) => n !== 'n_neurons' && !new RegExp(`(?<![\\w.>])${n}\\b`).test(code)).map((n) => `(void)${n};`);
}

export function guardName(plan: ModelPlan, suffix: string): string {
  return `SALTUS_${plan.prefix.toUpperCase()}_${suffix}`;
}

export function cTarget(plan: ModelPlan, f: CFlavour, base: HeaderBase): GeneratedFile[] {
  const M = plan.prefix;
  const precision = f.float ? 'float' : 'double';
  const head = (file: string) => blockComment(headerLines(plan, { ...base, file, target: 'C99', precision, esc: cComment }));
  const phases = new CPhases(plan, { ...f, cuda: false }).all();
  const proto = prototypes(plan, { ...f, cuda: false });

  const h: string[] = [...head(`${M}.h`), `#ifndef ${guardName(plan, 'H')}`, `#define ${guardName(plan, 'H')}`, '',
    '#ifdef __cplusplus', 'extern "C" {', '#endif', '', ...structDefinitions(plan, f)];
  if (proto.defaults) h.push(`${proto.defaults};`);
  h.push(`${proto.prepare};`);
  for (const ph of phases) h.push(...phasePrototype(plan, ph).map((l, i, a) => (i === a.length - 1 ? `${l};` : l)));
  h.push('', '#ifdef __cplusplus', '}', '#endif', '', `#endif /* ${guardName(plan, 'H')} */`, '');

  const functions = phases.flatMap((ph) => cFunction(plan, ph));
  const prep = defaultsAndPrepare(plan, { ...f, cuda: false });
  const code = [...prep, ...functions].join('\n');
  const c: string[] = [...head(`${M}.c`), '#include <math.h>', `#include "${M}.h"`, '',
    ...helpers(plan, f, '', code), ...prep, ...functions];
  return [{ name: `${M}.h`, content: h.join('\n') }, { name: `${M}.c`, content: c.join('\n') }];
}
