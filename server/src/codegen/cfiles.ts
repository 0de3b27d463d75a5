// The pieces of C source that the C and CUDA targets share: the struct definitions (params,
// struct-of-arrays state, adjoint, gradients, step coefficients), the small numeric helpers
// (phi1, crossing time, the matrix exponential of an LTI flow), default parameters and
// `prepare` (dt, parameters, and for an LTI flow the exact propagator P, Q, q).
// Invariants: no allocation and no globals other than the model-prefixed functions; every
// helper emitted is used (the files compile with -Wall -Wextra -Werror); model text only
// appears in comments, escaped by cComment.
import { toPlain } from '../symbolic/print';
import { cComment } from './escape';
import { type CFlavour, CScope, cTypes } from './cexpr';
import type { ModelPlan } from './plan';

/** Wraps a call or declaration `head(args)` at about 100 columns. */
export function wrapCall(head: string, args: readonly string[], indent: string, tail = ''): string[] {
  const one = `${indent}${head}(${args.join(', ')})${tail}`;
  if (one.length <= 100) return [one];
  const pad = ' '.repeat(indent.length + head.length + 1);
  const lines: string[] = [];
  let cur = `${indent}${head}(`;
  args.forEach((a, i) => {
    const piece = a + (i < args.length - 1 ? ',' : `)${tail}`);
    if (cur.trim().length && cur.length + piece.length + 1 > 100 && !cur.endsWith('(')) { lines.push(cur.trimEnd()); cur = pad; }
    cur += (cur.endsWith('(') || cur === pad ? '' : ' ') + piece;
  });
  lines.push(cur);
  return lines;
}

/** A block comment from plain lines (already escaped). */
export function blockComment(lines: readonly string[], indent = ''): string[] {
  if (lines.length === 1) return [`${indent}/* ${lines[0]} */`];
  return [`${indent}/*`, ...lines.map((l) => `${indent} *${l ? ' ' + l : ''}`), `${indent} */`];
}

/** Parameters travel in a struct unless inlined (or there are none). */
export const hasParamsStruct = (plan: ModelPlan, f: CFlavour): boolean => !f.inline && plan.params.length > 0;

export function structDefinitions(plan: ModelPlan, f: CFlavour): string[] {
  const { R } = cTypes(f);
  const M = plan.prefix, n = plan.states.length;
  const out: string[] = [`#define ${M}_N_STATES ${n}`, ''];
  const doc = (d?: string) => (d ? ` "${cComment(d)}"` : '');
  if (hasParamsStruct(plan, f)) {
    out.push('/* Parameters (SI units, see the file header). */', 'typedef struct {');
    for (const p of plan.params) out.push(`    ${R} ${p.id}; /* [${cComment(p.unitSI)}]${doc(p.doc)} */`);
    out.push(`} ${M}_params;`, '');
  }
  out.push('/* The state of n neurons: one array per state variable (struct of arrays), SI units. */', 'typedef struct {');
  for (const s of plan.states) out.push(`    ${R} *${s.id}; /* [${cComment(s.unitSI)}]${doc(s.doc)} */`);
  out.push(`} ${M}_state;`, '');
  out.push('/* Costates lambda_X = dL/dX(t) of n neurons (SI: the unit of L per unit of X). */', 'typedef struct {');
  for (const s of plan.states) out.push(`    ${R} *lambda_${s.id};`);
  out.push(`} ${M}_adjoint;`, '');
  if (plan.gradParams.length) {
    out.push('/* Accumulated parameter gradients dL/dp, one entry per neuron (sum them for a shared parameter).', '   A NULL array is skipped. */', 'typedef struct {');
    for (const name of plan.gradParams) out.push(`    ${R} *${plan.params.find((p) => p.name === name)!.id};`);
    out.push(`} ${M}_grads;`, '');
  }
  out.push(`/* Step coefficients: fill with ${M}_prepare, again whenever dt or a parameter changes. */`, 'typedef struct {', `    ${R} dt; /* [s] */`);
  if (hasParamsStruct(plan, f)) out.push(`    ${M}_params params;`);
  if (plan.forward.kind === 'exact-propagator') {
    const order = plan.states.map((s) => s.id).join(', ');
    out.push(`    ${R} P[${n}][${n}]; /* exact propagator P = e^{A dt}; rows and columns: ${order} */`,
      `    ${R} Q[${n}][${n}]; /* Q = int_0^dt e^{A s} ds */`, `    ${R} q[${n}]; /* q = Q c: x(t + dt) = P x(t) + q */`);
  }
  out.push(`} ${M}_coeffs;`, '');
  return out;
}

export function prototypes(plan: ModelPlan, f: CFlavour): { defaults?: string; prepare: string } {
  const { R } = cTypes(f), M = plan.prefix;
  const prepare = hasParamsStruct(plan, f) ? `int ${M}_prepare(const ${M}_params *par, ${R} dt, ${M}_coeffs *coeffs)` : `int ${M}_prepare(${R} dt, ${M}_coeffs *coeffs)`;
  return { ...(hasParamsStruct(plan, f) ? { defaults: `void ${M}_default_params(${M}_params *par)` } : {}), prepare };
}

/** Numeric helpers of the phases; `qualifier` is '' in C and '__device__' in CUDA (kernels only). Only used ones are emitted. */
export function helpers(plan: ModelPlan, f: CFlavour, qualifier: string, code: string): string[] {
  const { R, lit, fn } = cTypes(f), M = plan.prefix;
  const q = qualifier ? `${qualifier} ` : '';
  const out: string[] = [];
  if (code.includes(`${M}_phi1(`)) {
    out.push('/* phi1(z) = (e^z - 1)/z, with expm1 (no cancellation) and its series near 0 (as the step analysis). */',
      `${q}static ${R} ${M}_phi1(${R} z)`, '{', `    if (isinf(z)) return z > ${lit(0)} ? z : ${lit(0)};`,
      `    if (${fn('fabs')}(z) < ${lit(1e-5)}) return ${lit(1)} + z / ${lit(2)} + z * z / ${lit(6)};`, `    return ${fn('expm1')}(z) / z;`, '}', '');
  }
  if (code.includes(`${M}_crossing_time(`)) {
    out.push('/* Crossing time inside [t_start, t_start + dt] by linear interpolation of the guard values. */',
      `${q}static ${R} ${M}_crossing_time(${R} g_start, ${R} g_end, ${R} t_start, ${R} dt)`, '{',
      `    const ${R} span = g_start - g_end;`, `    ${R} theta;`, `    if (!(span != ${lit(0)}) || !isfinite(span)) return t_start + dt;`,
      '    theta = g_start / span;', `    if (theta > ${lit(1)}) theta = ${lit(1)};`, `    if (theta < ${lit(0)}) theta = ${lit(0)};`,
      '    return t_start + theta * dt;', '}', '');
  }
  return out;
}

/** The matrix exponential used by prepare (LTI flows only). */
function expmHelper(plan: ModelPlan, f: CFlavour): string[] {
  const { R, lit, fn } = cTypes(f), M = plan.prefix, N = 2 * plan.states.length;
  return [
    `/* e = e^m for the ${N} x ${N} augmented matrix, by scaling and squaring of the Taylor series, carried`,
    '   as e = I + g so that entries near the identity keep their relative accuracy: m is scaled by 2^-s',
    '   until its 1-norm is at most 1/2, g = x + x^2/2! + ... + x^24/24! (the remainder is below 1e-30',
    '   relative), then g <- 2 g + g g (that is, e <- e e) s times. */',
    `static void ${M}_expm(${R} m[${N}][${N}], ${R} e[${N}][${N}])`, '{',
    `    ${R} x[${N}][${N}], term[${N}][${N}], g[${N}][${N}], prod[${N}][${N}], norm = ${lit(0)};`, '    int i, j, k, r, s = 0;',
    `    for (j = 0; j < ${N}; j++) {`, `        ${R} col = ${lit(0)};`, `        for (i = 0; i < ${N}; i++) col += ${fn('fabs')}(m[i][j]);`,
    '        if (col > norm) norm = col;', '    }', `    while (norm > ${lit(0.5)} && s < 1000) { norm /= ${lit(2)}; s++; }`,
    `    for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) {`, `        x[i][j] = ${fn('ldexp')}(m[i][j], -s);`,
    '        term[i][j] = g[i][j] = x[i][j];', '    }',
    '    for (k = 2; k <= 24; k++) {',
    `        for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) {`, `            ${R} acc = ${lit(0)};`,
    `            for (r = 0; r < ${N}; r++) acc += term[i][r] * x[r][j];`, `            prod[i][j] = acc / (${R})k;`, '        }',
    `        for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) {`, '            term[i][j] = prod[i][j];', '            g[i][j] += term[i][j];', '        }', '    }',
    '    for (k = 0; k < s; k++) {',
    `        for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) {`, `            ${R} acc = ${lit(2)} * g[i][j];`,
    `            for (r = 0; r < ${N}; r++) acc += g[i][r] * g[r][j];`, '            prod[i][j] = acc;', '        }',
    `        for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) g[i][j] = prod[i][j];`, '    }',
    `    for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) e[i][j] = (i == j ? ${lit(1)} : ${lit(0)}) + g[i][j];`, '}', ''];
}

export function defaultsAndPrepare(plan: ModelPlan, f: CFlavour): string[] {
  const { R, lit } = cTypes(f), M = plan.prefix, n = plan.states.length;
  const proto = prototypes(plan, f);
  const out: string[] = [];
  if (proto.defaults) {
    out.push('/* The parameter values of the model (SI). */', proto.defaults, '{');
    for (const p of plan.params) out.push(`    par->${p.id} = ${lit(p.valueSI)};${p.declaredUnit ? ` /* ${cComment(p.declaredUnit)} in the model */` : ''}`);
    out.push('}', '');
  }
  if (plan.forward.kind === 'exact-propagator') out.push(...expmHelper(plan, f));
  const scope = new CScope(plan, f, null, 't_start');
  const body: string[] = [`if (!coeffs || !(dt > ${lit(0)}) || !isfinite(dt)) return -1;`, 'coeffs->dt = dt;'];
  if (hasParamsStruct(plan, f)) body.push('coeffs->params = *par;');
  if (plan.forward.kind === 'exact-propagator') {
    const N = 2 * n, fw = plan.forward;
    body.push(`/* The flow is linear time-invariant, f = A x + c. The exponential of the augmented matrix`,
      '   [[A dt, I dt], [0, 0]] is [[P, Q], [0, I]]. */', `${R} aug[${N}][${N}], expo[${N}][${N}];`, 'int i, j;',
      `for (i = 0; i < ${N}; i++) for (j = 0; j < ${N}; j++) aug[i][j] = ${lit(0)};`);
    for (let i = 0; i < n; i++) for (let j = 0; j < n; j++) {
      const a = fw.A[i]![j]!;
      if (a.k === 'num' && a.v === 0) continue;
      body.push(`aug[${i}][${j}] = (${scope.e(a)}) * dt; /* A: d f_${cComment(plan.states[i]!.name)} / d ${cComment(plan.states[j]!.name)} = ${cComment(toPlain(a))} */`);
    }
    body.push(`for (i = 0; i < ${n}; i++) aug[i][${n} + i] = dt;`, `${M}_expm(aug, expo);`,
      `for (i = 0; i < ${n}; i++) for (j = 0; j < ${n}; j++) {`, '    coeffs->P[i][j] = expo[i][j];', `    coeffs->Q[i][j] = expo[i][${n} + j];`, '}');
    for (let i = 0; i < n; i++) {
      const terms = fw.c.map((c, j) => (c.k === 'num' && c.v === 0 ? '' : `coeffs->Q[${i}][${j}] * (${scope.e(c)})`)).filter(Boolean);
      body.push(`coeffs->q[${i}] = ${terms.length ? terms.join(' + ') : lit(0)};`);
    }
    body.push(`for (i = 0; i < ${n}; i++) {`, '    if (!isfinite(coeffs->q[i])) return -1;',
      `    for (j = 0; j < ${n}; j++) if (!isfinite(coeffs->P[i][j]) || !isfinite(coeffs->Q[i][j])) return -1;`, '}');
  }
  body.push('return 0;');
  out.push(`/* Step coefficients for dt (s)${hasParamsStruct(plan, f) ? ' and the parameters par' : ''}; returns 0, or -1 for a dt that is not positive`,
    '   and finite or a coefficient that is not finite. */', proto.prepare, '{',
    ...(hasParamsStruct(plan, f) && !scope.usesParams() ? ['    (void)par;'] : []), ...body.map((l) => `    ${l}`), '}', '');
  return out;
}
