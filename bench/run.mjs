#!/usr/bin/env node
// npm run bench: builds dist/ (scripts/build.mjs; --no-build skips it), then runs every
// bench/*.mjs but this one, each as its own child process, one after another (so they do not
// compete for the CPUs), prints each one's output, and ends with every figure side by side.
// A bench reports figures by appending JSON lines { bench, name, value, unit, goal? } to the
// file named by the BENCH_JSON environment variable (latency, derive, hard and startup do); for a
// bench that does not, its last output lines stand in the summary. A bench that exits
// non-zero (e.g. a missing compiler: exit 2) is listed with its reason; the others still run.
// These are measurements, not tests: nothing here fails on a slow figure.
// Usage: npm run bench [-- --no-build] [-- --only NAME[,NAME]]
import { spawn, spawnSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { cpus, loadavg, tmpdir, totalmem } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const here = dirname(fileURLToPath(import.meta.url));
const root = resolve(here, '..');
const args = process.argv.slice(2);
const only = args.includes('--only') ? args[args.indexOf('--only') + 1].split(',') : undefined;

console.log(`Saltus benchmarks, ${new Date().toISOString().slice(0, 16).replace('T', ' ')} UTC`);
console.log(`machine: ${cpus()[0]?.model ?? 'unknown CPU'} x ${cpus().length}, ${(totalmem() / 2 ** 30).toFixed(0)} GiB, Node ${process.version}, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
if (!args.includes('--no-build')) {
  const b = spawnSync(process.execPath, [join(root, 'scripts', 'build.mjs')], { cwd: root, encoding: 'utf8' });
  if (b.status !== 0) { console.error(`bench: the build failed:\n${b.stdout}${b.stderr}`); process.exit(1); }
  console.log('build: dist/ rebuilt from the sources');
}

const benches = readdirSync(here).filter((f) => f.endsWith('.mjs') && f !== 'run.mjs').sort()
  .filter((f) => !only || only.includes(f.replace(/\.mjs$/, '')));
const dir = mkdtempSync(join(tmpdir(), 'saltus-bench-'));
const figuresFile = join(dir, 'figures.jsonl');
const results = [];
for (const f of benches) {
  console.log(`\n=== ${f} ${'='.repeat(Math.max(0, 60 - f.length))}`);
  const t0 = performance.now();
  const code = await new Promise((res) => {
    const child = spawn(process.execPath, [join(here, f)], { cwd: root, env: { ...process.env, BENCH_JSON: figuresFile }, stdio: ['ignore', 'pipe', 'pipe'] });
    let tail = '';
    const keep = (d) => { process.stdout.write(d); tail = (tail + d).slice(-4000); };
    child.stdout.on('data', keep);
    child.stderr.on('data', keep);
    child.on('close', (c) => { results.push({ f, code: c, tail, s: (performance.now() - t0) / 1000 }); res(c); });
  });
  if (code !== 0) console.log(`(${f} exited with ${code})`);
}

const figures = existsSync(figuresFile) ? readFileSync(figuresFile, 'utf8').split('\n').filter(Boolean).map((l) => JSON.parse(l)) : [];
rmSync(dir, { recursive: true, force: true });
console.log(`\n=== all figures ${'='.repeat(52)}`);
const fmt = (v) => (Math.abs(v) >= 100 ? v.toFixed(0) : Math.abs(v) >= 10 ? v.toFixed(1) : v.toFixed(2));
for (const x of figures) console.log(`${x.bench.padEnd(10)}${x.name.padEnd(52)}${`${fmt(x.value)} ${x.unit}`.padStart(14)}${x.goal ? `   goal ${x.goal}` : ''}`);
for (const r of results) {
  if (figures.some((x) => `${x.bench}.mjs` === r.f)) continue;
  const lines = r.tail.trim().split('\n').slice(-8);
  console.log(`${r.f.replace(/\.mjs$/, '').padEnd(10)}${r.code === 0 ? '(its own figures, last lines:)' : `(exited ${r.code}: skipped or failed)`}`);
  for (const l of lines) console.log(`          ${l}`);
}
console.log(`\n${results.map((r) => `${r.f} ${r.s.toFixed(0)} s${r.code ? ` (exit ${r.code})` : ''}`).join(', ')}`);
