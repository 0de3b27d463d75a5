#!/usr/bin/env node
// P6: times on hard inputs and one micro-measure, moved here from the unit tests (which keep
// only generous budgets that catch hangs). Each figure is printed beside its goal; none fails.
// - the symbolic derivative: d/dV of the AdEx flow (Brette & Gerstner 2005, Eq. 1), a fresh
//   tree each time, normalised (symbolic/derivative.ts); median per derivative over 5 rounds
//   of 1,000. Goal < 800 us, ten times faster than mathjs's `derivative` with simplification
//   (about 8 ms on this rate, docs/references.md "Library facts"): a derivation takes dozens
//   of these.
// - the step analysis (step/analyseStep) of the awkward flows of tests/step-scheme.test.ts
//   (kinks, logs, overflow, NaN at the reference...): the slowest of them. Goal < 100 ms each,
//   so that one such neuron uses a small part of the language server's 2,000 ms budget of
//   derived checks per document version (lsp/server.ts DERIVED_BUDGET_MS).
// - `analyse` on the pathological inputs of tests/pathological.test.ts: a 5,000-term sum and
//   10,000-deep nestings (refused as too-complex), `let`s doubling 40 times (refused by size),
//   a 20,000-line file, and a text over the 4 MiB limit (refused unread). Goals: refusals within
//   100 ms (they must stay cheaper than one edit's checks), the 20,000-line file within 1 s
//   (the P1 edit latency of that file is dominated by it).
// The goals are ours (the budgets above), not published figures.
// Usage: node bench/hard.mjs
import { appendFileSync, mkdtempSync, rmSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import { createRequire } from 'node:module';
import { cpus, loadavg, tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const require = createRequire(join(root, 'package.json'));
const { build } = require('esbuild');
const dir = mkdtempSync(join(tmpdir(), 'saltus-bench-hard-'));
const src = (p) => JSON.stringify(join(root, p));

const ENTRY = `
import { analyse, MAX_TEXT_LENGTH } from ${src('server/src/pipeline')};
import { derivative } from ${src('server/src/symbolic')};
import { analyseStep } from ${src('server/src/step')};
import { fromMathjs } from ${src('tests/helpers/parseMathjs')};
import { generatedFile } from ${src('tests/regressions/bigFiles')};
const out = [];
const median = (xs) => { const s = [...xs].sort((a, b) => a - b); return s[Math.floor((s.length - 1) / 2)]; };
const time = (f, rounds = 5) => { f(); const ms = []; for (let k = 0; k < rounds; k++) { const t0 = performance.now(); f(); ms.push(performance.now() - t0); } return median(ms); };

// Symbolic derivative of the AdEx flow, a fresh (parsed) tree each time, as the test measured it.
{
  const text = '(-g_L*(V-E_L) + g_L*Delta_T*exp((V-V_T)/Delta_T) - w + I)/C';
  const trees = Array.from({ length: 1000 }, () => fromMathjs(text));
  const ms = time(() => { for (const t of trees) derivative(t, 'V'); });
  // 1,000 derivatives in N ms is N us per derivative.
  out.push({ name: 'P6 d/dV of the AdEx flow (fresh tree, normalised)', value: ms, unit: 'us', goal: '< 800 us' });
}

// Step analysis of awkward flows.
{
  const flows = ['dV/dt = -abs(V) / tau', 'dV/dt = log(V) / tau', 'dV/dt = exp(V * 1e6) / tau', 'dV/dt = (max(V, 0.5) - V) / tau',
    'dV/dt = V / (tau - tau)', 'dV/dt = 1e300 * V / tau', 'dV/dt = sqrt(V - 1) / tau', 'dV/dt = V^3 / tau - V / tau',
    'dV/dt = sigmoid(V) / tau - V / tau', 'dV/dt = tanh(V) * t / tau / tau'];
  let worst = 0, worstFlow = '';
  for (const f of flows) {
    const n = analyse('timestep 0.1 [ms]\\nneuron N {\\n param tau = 10 [ms]\\n state V = 0\\n ' + f + '\\n fire when V crosses 1 up { V := 0 }\\n}').model.neurons[0];
    const ms = time(() => analyseStep(n, 1e-4));
    if (ms > worst) { worst = ms; worstFlow = f; }
  }
  out.push({ name: 'P6 step analysis, slowest awkward flow', value: worst, unit: 'ms', goal: '< 100 ms', note: worstFlow });
}

// analyse on pathological inputs.
{
  const model = (flow, lets = '') => 'timestep 0.1 [ms]\\nneuron N {\\n  param tau = 10 [ms]\\n  state V = 0.5\\n' + lets + '  dV/dt = ' + flow + '\\n  fire when V crosses 1 up { V := 0 }\\n}\\n';
  const lets = Array.from({ length: 40 }, (_, i) => '  let a' + (i + 1) + ' = ' + (i ? 'a' + i + ' * a' + i : 'V') + '\\n').join('');
  const cases = [
    ['5,000-term sum (too-complex)', model('(' + Array.from({ length: 5000 }, (_, i) => ((i % 9) + 1) + ' * V').join(' + ') + ') / tau'), '< 100 ms'],
    ['10,000 nested parentheses (too-complex)', model('('.repeat(10000) + '-V' + ')'.repeat(10000) + ' / tau'), '< 100 ms'],
    ['10,000 unary minus signs (too-complex)', model('-'.repeat(10000) + 'V / tau'), '< 100 ms'],
    ['10,000-long chain of exponents (too-complex)', model('(V' + '^1'.repeat(10000) + ') / tau'), '< 100 ms'],
    ['10,000 nested calls (too-complex)', model('exp('.repeat(10000) + 'V' + ')'.repeat(10000) + ' / tau'), '< 100 ms'],
    ['lets doubling 40 times (too-complex)', model('-a40 / tau', lets), '< 100 ms'],
    ['20,000-line file', generatedFile(20000), '< 1000 ms'],
    ['text over the 4 MiB limit (refused unread)', 'neuron A { state V = 0 dV/dt = 0 }\\n' + ' '.repeat(MAX_TEXT_LENGTH), '< 100 ms'],
  ];
  for (const [name, text, goal] of cases) {
    const codes = analyse(text).diagnostics.map((d) => d.code);
    out.push({ name: 'P6 analyse ' + name, value: time(() => analyse(text), 3), unit: 'ms', goal, note: codes.includes('too-complex') ? 'too-complex' : codes.length + ' diagnostics' });
  }
}
process.stdout.write(JSON.stringify(out));
`;

let figures = [];
try {
  await build({ stdin: { contents: ENTRY, resolveDir: root, loader: 'ts' }, bundle: true, platform: 'node', format: 'cjs', target: 'node20', outfile: join(dir, 'hard.cjs'), logLevel: 'silent' });
  const r = spawnSync(process.execPath, [join(dir, 'hard.cjs')], { encoding: 'utf8', maxBuffer: 64 << 20 });
  if (r.status !== 0) { console.error(`bench/hard.mjs: the measurement failed:\n${r.stderr}`); process.exit(1); }
  figures = JSON.parse(r.stdout);
  console.log(`P6 hard inputs (median of 5 runs, 3 for analyse, after one warm-up); ${cpus().length} CPUs, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  for (const f of figures) {
    const met = meets(f.value, f.goal);
    console.log(`${f.name.replace(/^P6 /, '').padEnd(58)}${`${f.value.toFixed(f.value < 10 ? 2 : 0)} ${f.unit}`.padStart(12)}   goal ${f.goal}: ${met ? 'met' : 'NOT met'}${f.note ? `  (${f.note})` : ''}`);
  }
} finally {
  rmSync(dir, { recursive: true, force: true });
}
if (process.env.BENCH_JSON) for (const { note, ...f } of figures) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'hard', ...f }) + '\n');

/** Whether a value meets a goal written as '< N unit'. */
function meets(value, goal) {
  const m = /^<\s*([\d.]+)/.exec(goal);
  return m ? value < Number(m[1]) : true;
}
