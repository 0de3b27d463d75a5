#!/usr/bin/env node
// P5: language-server cold start to first diagnostics, and bundle sizes. Starts the built
// server (dist/server.js --stdio; `npm run build` first) as a fresh process, sends
// initialize / initialized / didOpen of samples/lif_current.saltus and times spawn -> the
// first publishDiagnostics (and spawn -> initialize answered); median of 7 starts, in two
// kinds: the first start after an install (an empty V8 code cache directory each time) and a
// later start (the cache the first start wrote; server/src/boot/serverEntry.ts). Then the
// size of each file in dist/ and of the newest .vsix in the project root (skipped with a
// reason when there is none: `npm run package` builds it).
import { spawn } from 'node:child_process';
import { appendFileSync, existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, statSync } from 'node:fs';
import { createRequire } from 'node:module';
import { cpus, loadavg, tmpdir } from 'node:os';
import { dirname, join, relative, resolve, sep } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const require = createRequire(join(root, 'package.json'));
const { createProtocolConnection, StreamMessageReader, StreamMessageWriter } = require('vscode-languageserver-protocol/node');
const server = join(root, 'dist', 'server.js');
if (!existsSync(server)) { console.error('bench/startup.mjs: dist/server.js is missing; run npm run build first'); process.exit(2); }
const STARTS = 7;
const text = readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8');

async function coldStart(cacheDir) {
  const t0 = performance.now();
  const proc = spawn(process.execPath, [server, '--stdio'], { stdio: ['pipe', 'pipe', 'inherit'], env: { ...process.env, SALTUS_CODE_CACHE_DIR: cacheDir } });
  const conn = createProtocolConnection(new StreamMessageReader(proc.stdout), new StreamMessageWriter(proc.stdin));
  const first = new Promise((res) => conn.onNotification('textDocument/publishDiagnostics', () => res(performance.now())));
  conn.onRequest('workspace/configuration', (p) => p.items.map(() => ({})));
  conn.listen();
  await conn.sendRequest('initialize', { processId: process.pid, rootUri: null, capabilities: {} });
  const initialized = performance.now();
  await conn.sendNotification('initialized', {});
  await conn.sendNotification('textDocument/didOpen', { textDocument: { uri: 'file:///bench/lif_current.saltus', languageId: 'saltus', version: 1, text } });
  const diag = await first;
  await conn.sendRequest('shutdown');
  conn.sendNotification('exit');
  await new Promise((r) => proc.on('exit', r));
  conn.dispose();
  return { init: initialized - t0, diag: diag - t0 };
}

const median = (xs) => { const s = [...xs].sort((a, b) => a - b); return s[Math.floor((s.length - 1) / 2)]; };
const kib = (n) => `${(n / 1024).toFixed(1)} KiB`;
console.log(`P5 cold start (dist/server.js --stdio, median of ${STARTS}); ${cpus().length} CPUs, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
const scratch = mkdtempSync(join(tmpdir(), 'saltus-bench-startup-'));
const firstRuns = [], laterRuns = [];
for (let k = 0; k < STARTS; k++) {
  firstRuns.push(await coldStart(join(scratch, `first-${k}`))); // nothing cached: the first start after an install
  laterRuns.push(await coldStart(join(scratch, 'later'))); // the cache an earlier start wrote (the first of these writes it)
}
laterRuns.shift();
laterRuns.push(await coldStart(join(scratch, 'later')));
rmSync(scratch, { recursive: true, force: true });
// Goals and the figures they replace (measured before the lean start: 580 ms under load, 378 ms quiet; dist/ 7.6 MB).
const ratio = (v, was) => `ratio ${(v / was).toFixed(2)} to ${was}`;
const figures = [];
for (const [kind, runs] of [['first start after install (no code cache)', firstRuns], ['later start (code cache)', laterRuns]]) {
  const init = median(runs.map((r) => r.init)), diag = median(runs.map((r) => r.diag));
  console.log(`  ${kind}`);
  console.log(`    spawn -> initialize answered   ${init.toFixed(0)} ms`);
  console.log(`    spawn -> first diagnostics     ${diag.toFixed(0)} ms   (min ${Math.min(...runs.map((r) => r.diag)).toFixed(0)}, max ${Math.max(...runs.map((r) => r.diag)).toFixed(0)}); goal <= 250 ms, ${ratio(diag, 378)} quiet (580 under load)`);
  figures.push({ name: `P5 cold start to first diagnostics, ${kind}`, value: diag, unit: 'ms', goal: `<= 250 ms (was 580 under load, 378 quiet; ${ratio(diag, 378)})` },
    { name: `P5 cold start to initialize, ${kind}`, value: init, unit: 'ms' });
}

function walk(dir) { return readdirSync(dir).flatMap((e) => { const p = join(dir, e); return statSync(p).isDirectory() ? walk(p) : [p]; }); }
const files = walk(join(root, 'dist'));
const shipped = files.filter((f) => !f.endsWith('.map'));
const total = shipped.reduce((n, f) => n + statSync(f).size, 0);
console.log(`P5 bundle sizes (dist/, source maps aside: ${kib(total)})`);
for (const f of shipped.filter((x) => !x.includes(join('dist', 'katex') + sep))) console.log(`  ${relative(root, f).padEnd(24)} ${kib(statSync(f).size).padStart(12)}`);
const katex = shipped.filter((x) => x.includes(join('dist', 'katex') + sep));
if (katex.length) console.log(`  ${'dist/katex/'.padEnd(24)} ${kib(katex.reduce((n, f) => n + statSync(f).size, 0)).padStart(12)}  (${katex.length} files)`);
console.log(`  ${'source maps'.padEnd(24)} ${kib(files.filter((f) => f.endsWith('.map')).reduce((n, f) => n + statSync(f).size, 0)).padStart(12)}  (not packed)`);
figures.push({ name: 'P5 dist/ size (without maps)', value: total / 1024, unit: 'KiB', goal: `<= 3,072 KiB (was 7,613; ${ratio(total / 1024, 7613)})` });
const vsix = readdirSync(root).filter((f) => f.endsWith('.vsix')).map((f) => ({ f, st: statSync(join(root, f)) })).sort((a, b) => b.st.mtimeMs - a.st.mtimeMs)[0];
if (vsix) {
  console.log(`  ${vsix.f.padEnd(24)} ${kib(vsix.st.size).padStart(12)}  (built ${vsix.st.mtime.toISOString().slice(0, 16).replace('T', ' ')})`);
  figures.push({ name: `P5 ${vsix.f} size`, value: vsix.st.size / 1024, unit: 'KiB', goal: `<= 1,024 KiB (was 1,087; ${ratio(vsix.st.size / 1024, 1087)})` });
} else console.log('  .vsix: skipped, none in the project root (npm run package builds one)');
if (process.env.BENCH_JSON) for (const f of figures) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'startup', ...f }) + '\n');
