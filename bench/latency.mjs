#!/usr/bin/env node
// P1: edit -> diagnostics latency over stdio. Starts the built language server
// (dist/server.js --stdio; `npm run build` first) and, for every sample and for generated
// files of 200, 2,000 and 20,000 lines, sends edits one at a time, each after the diagnostics
// of the previous one arrived (so coalescing never merges them: this is a lone edit's
// latency), timing didChange -> publishDiagnostics of that version. The edit types and deletes
// a space at the end of the middle line: inside one neuron block.
// Side by side in one run: the server as built (incremental re-analysis of the edited block)
// and the same server analysing every version whole (SALTUS_FULL_ANALYSIS=1, "full"), and,
// with --baseline DIR, the dist/server.js of another checkout (e.g. the main branch, built).
// Prints p50/p95 per file beside the goals (p95 <= 10 ms for the samples, <= 15 ms at 2,000
// lines, <= 50 ms at 20,000) and the figures they replace (140 ms and 1.3 s), and the growth
// per 10x lines (below 10 is below linear).
// Usage: node bench/latency.mjs [--edits N] [--baseline DIR]   (default 200; the 20,000-line file gets N/5, the whole-file modes fewer)
import { spawn } from 'node:child_process';
import { appendFileSync, existsSync, readFileSync, readdirSync } from 'node:fs';
import { createRequire } from 'node:module';
import { cpus, loadavg } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const require = createRequire(join(root, 'package.json'));
const { createProtocolConnection, StreamMessageReader, StreamMessageWriter } = require('vscode-languageserver-protocol/node');
const server = join(root, 'dist', 'server.js');
if (!existsSync(server)) { console.error('bench/latency.mjs: dist/server.js is missing; run npm run build first'); process.exit(2); }
const args = process.argv.slice(2);
const EDITS = Math.max(10, Number(args[args.indexOf('--edits') + 1]) || 200);
const baselineDir = args.includes('--baseline') ? resolve(args[args.indexOf('--baseline') + 1]) : undefined;
const baseline = baselineDir ? join(baselineDir, 'dist', 'server.js') : undefined;
if (baseline && !existsSync(baseline)) { console.error(`bench/latency.mjs: ${baseline} is missing (build that checkout first)`); process.exit(2); }

/** The same generator as tests/regressions/bigFiles.ts: 10-line LIF cells. */
function generatedFile(lines) {
  const blocks = ['timestep 0.1 [ms]\n'];
  for (let i = 0; 1 + (blocks.length - 1) * 10 < lines; i++) {
    blocks.push(`neuron Cell${i} "generated cell ${i}" {\n  param tau_m = ${10 + (i % 7)} [ms]\n  param tau_s = 5 [ms]\n  state V = 0\n  state I = 0\n`
      + `  dV/dt = (I - V) / tau_m\n  dI/dt = -I / tau_s\n  fire when V crosses 1 up { V := 0 }\n  incoming w { I := I + w }\n}\n`);
  }
  return blocks.join('');
}

const pct = (xs, p) => { const s = [...xs].sort((a, b) => a - b); return s[Math.min(s.length - 1, Math.floor(p * (s.length - 1) + 0.5))]; };

async function measure(name, text, edits, mode = 'incremental') {
  const env = { ...process.env, ...(mode === 'full' ? { SALTUS_FULL_ANALYSIS: '1' } : {}) };
  const proc = spawn(process.execPath, [mode === 'baseline' ? baseline : server, '--stdio'], { stdio: ['pipe', 'pipe', 'inherit'], env });
  const conn = createProtocolConnection(new StreamMessageReader(proc.stdout), new StreamMessageWriter(proc.stdin));
  const arrived = new Map();
  let wake = () => {};
  conn.onNotification('textDocument/publishDiagnostics', (p) => { if (!arrived.has(p.version)) arrived.set(p.version, performance.now()); wake(); });
  conn.onRequest('workspace/configuration', (p) => p.items.map(() => ({ diagnostics: { when: 'typing' } })));
  conn.onRequest('client/registerCapability', () => null);
  conn.listen();
  await conn.sendRequest('initialize', { processId: process.pid, rootUri: null, capabilities: { textDocument: { publishDiagnostics: { versionSupport: true } } } });
  await conn.sendNotification('initialized', {});
  const uri = `file:///bench/${name}`;
  const seen = (v) => new Promise((res) => { const c = () => (arrived.has(v) ? res(arrived.get(v)) : (wake = c)); c(); });
  conn.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'saltus', version: 1, text } });
  await seen(1);
  await new Promise((r) => setTimeout(r, 300)); // let the first derived checks finish
  // The edit: typing and deleting a space at the end of a line in the middle of the file.
  const lines = text.split(/\r\n|\r|\n/);
  const line = Math.floor(lines.length / 2), ch = lines[line].length;
  const times = [];
  for (let v = 2; v < 2 + edits; v++) {
    const change = v % 2 === 0 ? { range: { start: { line, character: ch }, end: { line, character: ch } }, text: ' ' }
      : { range: { start: { line, character: ch }, end: { line, character: ch + 1 } }, text: '' };
    const t0 = performance.now();
    conn.sendNotification('textDocument/didChange', { textDocument: { uri, version: v }, contentChanges: [change] });
    times.push((await seen(v)) - t0);
  }
  await conn.sendRequest('shutdown');
  conn.sendNotification('exit');
  await new Promise((r) => proc.on('exit', r));
  conn.dispose();
  return { name, mode, lines: lines.length, edits, p50: pct(times, 0.5), p95: pct(times, 0.95), max: Math.max(...times) };
}

const figures = [];
const GOAL = { samples: 10, 2000: 15, 20000: 50 };
const ISSUE = { 2000: 140, 20000: 1300 };
const row = (r, goal, was) => console.log(`${r.name.padEnd(24)}${r.mode.padEnd(12)}${String(r.lines).padStart(7)}${String(r.edits).padStart(6)}${r.p50.toFixed(2).padStart(9)}`
  + `${r.p95.toFixed(2).padStart(9)}${r.max.toFixed(1).padStart(9)}${(goal !== undefined ? `<= ${goal}` : '').padStart(9)}${(was !== undefined ? String(was) : '').padStart(8)}`
  + `${goal !== undefined && r.mode === 'incremental' ? (r.p95 <= goal ? '  met' : '  NOT met') : ''}`);
console.log(`P1 edit -> diagnostics over stdio (dist/server.js); ${cpus().length} CPUs, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}, ${new Date().toISOString()}`);
console.log(`${'file'.padEnd(24)}${'mode'.padEnd(12)}${'lines'.padStart(7)}${'edits'.padStart(6)}${'p50 ms'.padStart(9)}${'p95 ms'.padStart(9)}${'max ms'.padStart(9)}${'goal p95'.padStart(9)}${'issue'.padStart(8)}`);
const modes = ['incremental', 'full', ...(baseline ? ['baseline'] : [])];
const samples = readdirSync(join(root, 'samples')).filter((f) => f.endsWith('.saltus')).sort();
let worstSample = 0;
for (const f of samples) {
  const text = readFileSync(join(root, 'samples', f), 'utf8');
  for (const mode of modes) {
    const r = await measure(f, text, EDITS, mode);
    row(r, GOAL.samples);
    if (mode === 'incremental') worstSample = Math.max(worstSample, r.p95);
    figures.push({ name: `P1 ${f} ${mode} p95`, value: r.p95, unit: 'ms', ...(mode === 'incremental' ? { goal: `<= ${GOAL.samples} ms` } : {}) });
  }
}
const gen = new Map(modes.map((m) => [m, []]));
for (const n of [200, 2000, 20000]) {
  const text = generatedFile(n);
  for (const mode of modes) {
    if (mode === 'baseline' && n > 2000) { console.log(`generated-${n}.saltus   baseline: skipped (minutes per edit before the quadratic hints were fixed)`); continue; }
    // the whole-file modes take seconds per edit at 20,000 lines (the baseline's before its quadratic hints were fixed): fewer edits
    const edits = n === 20000 ? (mode === 'incremental' ? Math.max(10, Math.round(EDITS / 5)) : mode === 'full' ? 10 : 4) : mode === 'incremental' ? EDITS : Math.max(10, Math.round(EDITS / 4));
    let r;
    try { r = await measure(`generated-${n}.saltus`, text, edits, mode); } catch (e) { console.log(`generated-${n}.saltus ${mode}: failed (${e?.message ?? e})`); continue; }
    row(r, GOAL[n], ISSUE[n]);
    gen.get(mode).push(r);
    figures.push({ name: `P1 generated ${n} lines ${mode} p50`, value: r.p50, unit: 'ms' },
      { name: `P1 generated ${n} lines ${mode} p95`, value: r.p95, unit: 'ms', ...(GOAL[n] && mode === 'incremental' ? { goal: `<= ${GOAL[n]} ms (was ${ISSUE[n]} ms)` } : {}) });
  }
}
console.log(`samples: worst p95 ${worstSample.toFixed(2)} ms (goal <= ${GOAL.samples} ms: ${worstSample <= GOAL.samples ? 'met' : 'NOT met'})`);
for (const [mode, rs] of gen) {
  for (let i = 1; i < rs.length; i++) {
    const ratio = rs[i].p50 / rs[i - 1].p50;
    console.log(`growth ${mode}, ${rs[i - 1].lines} -> ${rs[i].lines} lines (x${(rs[i].lines / rs[i - 1].lines).toFixed(1)}), edits inside one block: p50 x${ratio.toFixed(1)}, p95 x${(rs[i].p95 / rs[i - 1].p95).toFixed(1)}`
      + (mode === 'incremental' ? ` (goal below linear, x10; before: x12.9 and x15.1)` : ''));
    figures.push({ name: `P1 growth ${mode} ${rs[i - 1].lines}->${rs[i].lines} lines (p50 ratio)`, value: ratio, unit: 'x', ...(mode === 'incremental' ? { goal: '< x10 (below linear)' } : {}) });
  }
}
const inc = gen.get('incremental'), full = gen.get('full');
for (let i = 0; i < Math.min(inc.length, full.length); i++) console.log(`${inc[i].lines} lines: whole-file p95 / incremental p95 = ${(full[i].p95 / inc[i].p95).toFixed(1)} (p50 ${(full[i].p50 / inc[i].p50).toFixed(1)}) in the same run`);
if (process.env.BENCH_JSON) for (const f of figures) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'latency', ...f }) + '\n');
