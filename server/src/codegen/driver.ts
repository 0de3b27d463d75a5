// <model>_driver.c (C target, --driver): a small program that runs ONE neuron with the
// model's default parameters, for testing and documentation (docs/codegen.md, "Driver").
// Contract: stdin holds `STEPS DT_SECONDS`, then the initial state in declaration order (SI),
// then any number of `K W` lines (a presynaptic spike arriving at step K with weight W, SI).
// For each step k = 0..STEPS-1 it (1) applies the incoming jumps of the spikes arriving at
// step k, in input order, (2) advances the flow one step, (3) tests the guard from its value
// before to its value after the step in the declared direction and, on a crossing, applies
// the spike jumps; then prints `k x1 x2 ... spiked` (state in declaration order, SI, %.17g,
// spiked 0/1). Spikes with K >= STEPS never arrive; K < 0, bad numbers or spikes for a
// model without an incoming block are input errors (exit 2, a message on stderr).
import { cComment } from './escape';
import type { CFlavour } from './cexpr';
import { cTypes } from './cexpr';
import { blockComment } from './cfiles';
import { type GeneratedFile, type HeaderBase } from './c';
import { headerLines } from './header';
import type { ModelPlan } from './plan';

export function driverFile(plan: ModelPlan, f: CFlavour, base: HeaderBase): GeneratedFile {
  const M = plan.prefix, { R } = cTypes(f);
  const name = `${M}_driver.c`;
  const params = !f.inline && plan.params.length > 0;
  const ns = plan.states.length;
  const head = blockComment([...headerLines(plan, { ...base, file: name, target: 'C99 test driver', precision: f.float ? 'float' : 'double', esc: cComment }),
    '', 'Reads `STEPS DT_SECONDS`, the initial state in declaration order', `(${plan.states.map((s) => s.id).join(' ')}), SI, then lines \`K W\`: a presynaptic spike arriving at`,
    'step K with weight W (SI). Each step k: (1) incoming jumps of the spikes of step k, (2) one forward',
    'step, (3) threshold test and spike jumps. Prints `k state... spiked` per step (%.17g, SI).',
    `Build: cc -std=c99 -O2 ${M}.c ${name} -lm -o ${M}_driver`]);
  const scanState = plan.states.map((_, i) => `&x0[${i}]`).join(', ');
  const fmt = plan.states.map(() => '%lf').join(' ');
  const L: string[] = [...head, '#include <stdio.h>', '#include <stdlib.h>', `#include "${M}.h"`, '',
    '/* One presynaptic spike of the input: arrives at step `step`; `order` keeps input order among equal steps. */',
    'typedef struct { long step; double weight; long order; } driver_spike;', '',
    'static int driver_by_step(const void *a, const void *b)', '{',
    '    const driver_spike *x = (const driver_spike *)a, *y = (const driver_spike *)b;',
    '    if (x->step != y->step) return x->step < y->step ? -1 : 1;',
    '    return x->order < y->order ? -1 : x->order > y->order;', '}', '',
    'static int driver_fail(const char *message)', '{', `    fprintf(stderr, "${M}_driver: %s\\n", message);`, '    return 2;', '}', '',
    'int main(void)', '{', '    long steps, k, count = 0, capacity = 0, next = 0;', '    double dt, w;', '    int got;',
    `    double x0[${ns}];`, `    ${R} ${plan.states.map((s) => `v_${s.id}[1]`).join(', ')};`,
    '    driver_spike *spikes = NULL;'];
  if (params) L.push(`    ${M}_params par;`);
  L.push(`    ${M}_coeffs coeffs;`, `    ${M}_state state;`);
  if (plan.fire) L.push(`    ${R} guard_before[1];`, '    unsigned char spiked[1];');
  if (plan.incoming) L.push(`    ${R} weight[1];`);
  L.push('',
    '    if (scanf("%ld %lf", &steps, &dt) != 2) return driver_fail("the first line must be STEPS DT_SECONDS");',
    '    if (steps < 0 || !(dt > 0.0)) return driver_fail("STEPS must be >= 0 and DT_SECONDS > 0");',
    `    if (scanf("${fmt}", ${scanState}) != ${ns}) return driver_fail("the second line must hold the ${ns} initial state value${ns === 1 ? '' : 's'}");`,
    '    while ((got = scanf("%ld %lf", &k, &w)) == 2) {', '        if (k < 0) { free(spikes); return driver_fail("a spike step K must be >= 0"); }',
    '        if (count == capacity) {', '            driver_spike *grown;', '            capacity = capacity ? 2 * capacity : 64;',
    '            grown = (driver_spike *)realloc(spikes, (size_t)capacity * sizeof *spikes);',
    '            if (!grown) { free(spikes); return driver_fail("out of memory"); }', '            spikes = grown;', '        }',
    '        spikes[count].step = k;', '        spikes[count].weight = w;', '        spikes[count].order = count;', '        count++;', '    }',
    '    if (got != EOF || !feof(stdin)) { free(spikes); return driver_fail("spike lines must be K W"); }');
  if (!plan.incoming) L.push(`    if (count > 0) { free(spikes); return driver_fail("${M} has no incoming block: it takes no spikes"); }`);
  L.push('    if (count > 1) qsort(spikes, (size_t)count, sizeof *spikes, driver_by_step);');
  if (params) L.push(`    ${M}_default_params(&par);`);
  L.push(`    if (${M}_prepare(${params ? '&par, ' : ''}(${R})dt, &coeffs) != 0) { free(spikes); return driver_fail("no finite step coefficients for this DT"); }`);
  plan.states.forEach((s, i) => L.push(`    v_${s.id}[0] = (${R})x0[${i}];`, `    state.${s.id} = v_${s.id};`));
  L.push('', '    for (k = 0; k < steps; k++) {', `        const ${R} t_start = (${R})((double)k * dt);`,
    '        /* (1) incoming jumps of the spikes arriving at step k */', '        while (next < count && spikes[next].step < k) next++;',
    '        while (next < count && spikes[next].step == k) {');
  if (plan.incoming) L.push(`            weight[0] = (${R})spikes[next].weight;`, `            ${M}_incoming(1, state, &coeffs, t_start, weight, NULL, NULL);`);
  L.push('            next++;', '        }', '        /* (2) the flow over one step */',
    `        ${M}_forward_step(1, state, &coeffs, t_start${plan.fire ? ', guard_before' : ''});`);
  if (plan.fire) L.push('        /* (3) threshold test and spike jumps */', `        ${M}_spike(1, state, &coeffs, t_start, guard_before, spiked, NULL, NULL);`);
  else L.push('        /* (3) this model has no fire block: it never spikes */');
  L.push('        printf("%ld", k);', ...plan.states.map((s) => `        printf(" %.17g", (double)v_${s.id}[0]);`),
    `        printf(" %d\\n", ${plan.fire ? '(int)spiked[0]' : '0'});`, '    }', '    free(spikes);', '    return 0;', '}', '');
  return { name, content: L.join('\n') };
}
