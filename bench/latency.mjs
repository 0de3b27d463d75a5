#!/usr/bin/env node
// P1: edit -> diagnostics latency over stdio. Starts the built language server
// (dist/server.js --stdio; `npm run build` first) and, for every sample and for generated
// files of 200, 2,000 and 20,000 lines, sends edits one at a time, each after the diagnostics
// of the previous one arrived (so coalescing never merges them: this is a lone edit's
// latency), timing didChange -> publishDiagnostics of that version. Prints p50/p95 per file
// and the growth ratios between the generated sizes (10x more lines each step: about 10 is
// linear growth). Goal (ISSUE): p95 under 20 ms for the samples, linear growth.
// Usage: node bench/latency.mjs [--edits N]   (default 200; the 20,000-line file gets N/5)
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

async function measure(name, text, edits) {
  const proc = spawn(process.execPath, [server, '--stdio'], { stdio: ['pipe', 'pipe', 'inherit'] });
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
  return { name, lines: lines.length, edits, p50: pct(times, 0.5), p95: pct(times, 0.95), max: Math.max(...times) };
}

const figures = [];
const row = (r) => console.log(`${r.name.padEnd(24)}${String(r.lines).padStart(8)}${String(r.edits).padStart(7)}${r.p50.toFixed(2).padStart(10)}${r.p95.toFixed(2).padStart(10)}${r.max.toFixed(1).padStart(10)}`);
console.log(`P1 edit -> diagnostics over stdio (dist/server.js); ${cpus().length} CPUs, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
console.log(`${'file'.padEnd(24)}${'lines'.padStart(8)}${'edits'.padStart(7)}${'p50 ms'.padStart(10)}${'p95 ms'.padStart(10)}${'max ms'.padStart(10)}`);
const samples = readdirSync(join(root, 'samples')).filter((f) => f.endsWith('.saltus')).sort();
for (const f of samples) {
  const r = await measure(f, readFileSync(join(root, 'samples', f), 'utf8'), EDITS);
  row(r);
  figures.push({ name: `P1 ${f} p50`, value: r.p50, unit: 'ms' }, { name: `P1 ${f} p95`, value: r.p95, unit: 'ms', goal: '< 20 ms' });
}
const gen = [];
for (const n of [200, 2000, 20000]) {
  const r = await measure(`generated-${n}.saltus`, generatedFile(n), n === 20000 ? Math.max(10, Math.round(EDITS / 5)) : EDITS);
  row(r);
  gen.push(r);
  figures.push({ name: `P1 generated ${n} lines p50`, value: r.p50, unit: 'ms' }, { name: `P1 generated ${n} lines p95`, value: r.p95, unit: 'ms' });
}
const worstSample = Math.max(...figures.filter((f) => / p95$/.test(f.name) && !f.name.includes('generated')).map((f) => f.value));
console.log(`samples: worst p95 ${worstSample.toFixed(2)} ms (goal < 20 ms: ${worstSample < 20 ? 'met' : 'NOT met'})`);
for (let i = 1; i < gen.length; i++) {
  const ratio = gen[i].p50 / gen[i - 1].p50;
  console.log(`growth ${gen[i - 1].lines} -> ${gen[i].lines} lines (x${(gen[i].lines / gen[i - 1].lines).toFixed(1)}): p50 x${ratio.toFixed(1)}, p95 x${(gen[i].p95 / gen[i - 1].p95).toFixed(1)}`);
  figures.push({ name: `P1 growth ${gen[i - 1].lines}->${gen[i].lines} lines (p50 ratio)`, value: ratio, unit: 'x', goal: `about x${(gen[i].lines / gen[i - 1].lines).toFixed(0)} (linear)` });
}
if (process.env.BENCH_JSON) for (const f of figures) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'latency', ...f }) + '\n');
