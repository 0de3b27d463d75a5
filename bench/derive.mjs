#!/usr/bin/env node
// P2: adjoint derivation time per sample neuron, against the same derivatives and
// simplification done by SymPy in a python3 subprocess (skipped with a reason where python3
// or sympy is missing). Ours: deriveNeuron (server/src/adjoint/derive.ts) uncached, which
// includes its budgeted simplification and the random-point check of every simplified form;
// median of 5 runs after 5 warm-up rounds (a running language server), and the cold time (the
// first derivation of each neuron in a fresh process). SymPy (one run per neuron, its own process, 300 s limit): from the same
// resolved flows f, guard g, spike jump h and incoming jump r (printed by toMathjs), the
// Jacobian, the adjoint flow -J^T lambda - dlV/dx, the guard slope, the tangential terms,
// phi, lambda just before a spike, the incoming coupling / jump / weight gradient and every
// trainable parameter's gradient terms (docs/language.md "Meaning", docs/adjoint.md), each passed
// through sympy.simplify. Goals: at least 10x faster than SymPy (ISSUE); each neuron under
// 200 ms warm (the bound tests/adjoint-derive.test.ts once asserted: a hover or CodeLens that
// derives a neuron must not hold the language server noticeably).
// Usage: node bench/derive.mjs [--runs N]
import { spawnSync } from 'node:child_process';
import { appendFileSync, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { cpus, loadavg, tmpdir } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const require = createRequire(join(root, 'package.json'));
const { build } = require('esbuild');
const args = process.argv.slice(2);
const RUNS = Math.max(1, Number(args[args.indexOf('--runs') + 1]) || 5);
const dir = mkdtempSync(join(tmpdir(), 'saltus-bench-derive-'));

const ENTRY = `
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { analyse } from ${JSON.stringify(join(root, 'server/src/pipeline'))};
import { deriveNeuron } from ${JSON.stringify(join(root, 'server/src/adjoint/derive'))};
import { toMathjs } from ${JSON.stringify(join(root, 'server/src/symbolic/print'))};
const root = ${JSON.stringify(root)};
const runs = ${RUNS};
const out = [];
const all = [];
for (const file of readdirSync(join(root, 'samples')).filter((f) => f.endsWith('.saltus')).sort()) {
  const a = analyse(readFileSync(join(root, 'samples', file), 'utf8'));
  for (const n of a.model.neurons.filter((x) => x.wellFormed)) all.push([file, n]);
}
// Cold: each neuron's first derivation in this fresh process (JIT warming up as it goes).
const cold = new Map();
for (const [, n] of all) { const t0 = performance.now(); deriveNeuron(n); cold.set(n, performance.now() - t0); }
// Warm, as in a long-running language server: after a few rounds over every sample.
for (let k = 0; k < 5; k++) for (const [, n] of all) deriveNeuron(n);
{
  for (const [file, n] of all) {
    const ms = [];
    let d;
    for (let k = 0; k < runs; k++) { const t0 = performance.now(); d = deriveNeuron(n); ms.push(performance.now() - t0); }
    ms.sort((x, y) => x - y);
    const states = n.states.map((s) => s.name);
    out.push({ file, name: n.name, ms: ms[Math.floor((ms.length - 1) / 2)], coldMs: cold.get(n), states, params: d.gradientParams,
      flows: states.map((x) => (n.flows.get(x) ? toMathjs(n.flows.get(x)) : '0')),
      guard: n.fire ? toMathjs(n.fire.guard) : null,
      jumps: n.fire ? states.map((x) => (n.fire.jumps.get(x) ? toMathjs(n.fire.jumps.get(x)) : x)) : null,
      weight: n.incoming ? n.incoming.weight : null,
      incoming: n.incoming ? states.map((x) => (n.incoming.jumps.get(x) ? toMathjs(n.incoming.jumps.get(x)) : x)) : null,
      names: [...states, ...n.params.map((p) => p.name), ...(n.incoming ? [n.incoming.weight] : []), 't'] });
  }
}
process.stdout.write(JSON.stringify(out));
`;

const PYTHON = String.raw`
import json, sys, time
import sympy as sp
from sympy.parsing.sympy_parser import parse_expr, standard_transformations, convert_xor
m = json.loads(sys.stdin.read())
loc = {n: sp.Symbol(n) for n in m['names']}
loc.update({'exp': sp.exp, 'log': sp.log, 'sqrt': sp.sqrt, 'tanh': sp.tanh, 'abs': sp.Abs, 'min': sp.Min, 'max': sp.Max, 'pow': sp.Pow,
            'sigmoid': lambda x: 1 / (1 + sp.exp(-x))})
P = lambda s: parse_expr(s, local_dict=loc, transformations=standard_transformations + (convert_xor,))
X = [loc[x] for x in m['states']]
n = len(X)
lam = [sp.Symbol('lambda_' + x) for x in m['states']]
dlV = [sp.Symbol('dlV_d' + x) for x in m['states']]
f = [P(s) for s in m['flows']]
g = P(m['guard']) if m['guard'] else None
h = [P(s) for s in m['jumps']] if m['jumps'] else None
r = [P(s) for s in m['incoming']] if m['incoming'] else None
p = [loc[q] for q in m['params']]
t = loc['t']
coupling, dlp, lvpost, lvpre, phi_s = sp.symbols('coupling dlp_dt lV_post lV_pre phi')
t0 = time.perf_counter()
out = []
J = [[sp.diff(fi, x) for x in X] for fi in f]
out += [-sum(J[i][j] * lam[i] for i in range(n)) - dlV[j] for j in range(n)]
out += [sum(lam[i] * sp.diff(f[i], q) for i in range(n)) for q in p]
def tangential(maps):
    post = dict(zip(X, maps))
    mx = [[sp.diff(mi, x) for x in X] for mi in maps]
    tan = [f[i].subs(post, simultaneous=True) - sum(mx[i][j] * f[j] for j in range(n)) - sp.diff(maps[i], t) for i in range(n)]
    return mx, tan
if g is not None:
    gx = [sp.diff(g, x) for x in X]
    gdot = sum(gx[j] * f[j] for j in range(n)) + sp.diff(g, t)
    hx, tan = tangential(h)
    phi = (sum(lam[i] * tan[i] for i in range(n)) + coupling - dlp + lvpost - lvpre) / gdot
    out += [gdot, phi]
    out += [sum(hx[i][j] * lam[i] for i in range(n)) + phi_s * gx[j] for j in range(n)]
    out += [sum(lam[i] * sp.diff(h[i], q) for i in range(n)) + phi_s * sp.diff(g, q) for q in p]
if r is not None:
    w = loc[m['weight']]
    ry, tan = tangential(r)
    out.append(sum(lam[i] * tan[i] for i in range(n)))
    out += [sum(ry[i][j] * lam[i] for i in range(n)) for j in range(n)]
    out.append(sum(lam[i] * sp.diff(r[i], w) for i in range(n)))
    out += [sum(lam[i] * sp.diff(r[i], q) for i in range(n)) for q in p]
simplified = [sp.simplify(e) for e in out]
print(json.dumps({'ms': 1000 * (time.perf_counter() - t0), 'expressions': len(simplified)}))
`;

const figures = [];
try {
  await build({ stdin: { contents: ENTRY, resolveDir: root, loader: 'ts' }, bundle: true, platform: 'node', format: 'cjs', target: 'node20', outfile: join(dir, 'derive.cjs'), logLevel: 'silent' });
  const ours = JSON.parse(spawnSync(process.execPath, [join(dir, 'derive.cjs')], { encoding: 'utf8', maxBuffer: 64 << 20 }).stdout);
  const py = spawnSync('python3', ['-c', 'import sympy; print(sympy.__version__)'], { encoding: 'utf8' });
  const sympy = py.status === 0 ? py.stdout.trim() : undefined;
  writeFileSync(join(dir, 'sympy_derive.py'), PYTHON);
  console.log(`P2 adjoint derivation: ours (median of ${RUNS}, uncached) vs SymPy ${sympy ?? '(not available)'} derivatives + simplify; ${cpus().length} CPUs, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
  if (!sympy) console.log(`SymPy skipped: ${py.error ? 'python3 not found' : 'python3 cannot import sympy'} (pip install sympy to compare)`);
  console.log(`${'sample / neuron'.padEnd(34)}${'cold ms'.padStart(9)}${'ours ms'.padStart(10)}${'SymPy ms'.padStart(12)}${'ratio'.padStart(9)}`);
  let ourTotal = 0, theirTotal = 0, coldTotal = 0, timedOut = false;
  for (const m of ours) {
    let theirs;
    if (sympy) {
      const r = spawnSync('python3', [join(dir, 'sympy_derive.py')], { input: JSON.stringify(m), encoding: 'utf8', timeout: 300_000 });
      if (r.status === 0) theirs = JSON.parse(r.stdout).ms; else { theirs = r.signal ? 300_000 : NaN; timedOut ||= !!r.signal; }
    }
    ourTotal += m.ms;
    if (theirs !== undefined) theirTotal += theirs;
    const ratio = theirs !== undefined ? theirs / m.ms : undefined;
    coldTotal += m.coldMs;
    console.log(`${`${m.file} / ${m.name}`.padEnd(34)}${m.coldMs.toFixed(1).padStart(9)}${m.ms.toFixed(2).padStart(10)}${theirs === undefined ? '-'.padStart(12) : `${theirs >= 300_000 ? '>' : ''}${theirs.toFixed(0)}`.padStart(12)}${ratio === undefined ? '-'.padStart(9) : `x${ratio.toFixed(0)}`.padStart(9)}`);
    figures.push({ name: `P2 derive ${m.name} (ours)`, value: m.ms, unit: 'ms', goal: '< 200 ms warm' });
    if (ratio !== undefined) figures.push({ name: `P2 derive ${m.name} SymPy/ours`, value: ratio, unit: 'x', goal: '>= 10x' });
  }
  if (sympy) {
    const ratio = theirTotal / ourTotal;
    console.log(`all sample neurons: ours ${ourTotal.toFixed(1)} ms warm (${coldTotal.toFixed(0)} ms cold, the first derivations in a fresh process), SymPy ${theirTotal.toFixed(0)} ms${timedOut ? ' (a run hit the 300 s limit)' : ''}: x${ratio.toFixed(0)} (goal >= x10: ${ratio >= 10 ? 'met' : 'NOT met'})`);
    figures.push({ name: 'P2 derive all samples SymPy/ours', value: ratio, unit: 'x', goal: '>= 10x' });
  }
} finally {
  rmSync(dir, { recursive: true, force: true });
}
if (process.env.BENCH_JSON) for (const f of figures) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'derive', ...f }) + '\n');
