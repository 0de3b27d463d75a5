#!/usr/bin/env node
// Wall time of `saltus crosscheck` on every demo scenario (samples/scenarios/NAME.json with
// samples/NAME.saltus), run through the built CLI (dist/cli.js; run `npm run build` first).
// For each scenario: the check's own wall time (as the command measures it: scenario
// validation, forward and backward passes, all finite-difference simulations, warnings)
// with its CPU time (less inflated by a busy machine), and the whole process (Node
// start-up, parsing and analysing the model file included),
// the median of --runs N runs (default 3). Then the wide 64 -> 64 -> 64 scenario
// (samples/scenarios/wide/lif_current_64.json, 8,194 rows) checked on a seeded sample of 50
// rows (--sample 50): the goal is seconds, where all rows take about 16,000 simulations.
// The load average is printed because the numbers mean little on a busy machine. Exit 1 if
// a scenario fails its check. Figures go to BENCH_JSON (bench/run.mjs) as well.
// Usage: node bench/crosscheck.mjs [--runs N] [--html DIR]   (--html also writes each report)
import { spawnSync } from 'node:child_process';
import { appendFileSync, existsSync, readdirSync } from 'node:fs';
import { cpus, loadavg } from 'node:os';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const cli = join(root, 'dist', 'cli.js');
const args = process.argv.slice(2);
const opt = (name, fallback) => { const i = args.indexOf(name); return i >= 0 && args[i + 1] ? args[i + 1] : fallback; };
const runs = Math.max(1, Number(opt('--runs', '3')) || 3);
const htmlDir = opt('--html', '');
if (!existsSync(cli)) { console.error('bench: dist/cli.js is missing; run npm run build first'); process.exit(2); }

const median = (xs) => { const s = [...xs].sort((a, b) => a - b); return s[Math.floor((s.length - 1) / 2)]; };
const scenarios = readdirSync(join(root, 'samples', 'scenarios')).filter((f) => f.endsWith('.json')).sort()
  .map((f) => ({ label: f.replace(/\.json$/, ''), model: f.replace(/\.json$/, ''), scenario: f, extra: [] }));
scenarios.push({ label: 'wide64 sample 50', model: 'lif_current', scenario: 'wide/lif_current_64.json', extra: ['--sample', '50'] });
const figures = [];
console.log(`crosscheck benchmark: ${scenarios.length} scenarios, median of ${runs} runs; ${cpus().length} CPUs, load average ${loadavg().map((x) => x.toFixed(2)).join(' ')}`);
console.log(`${'scenario'.padEnd(18)}${'check [ms]'.padStart(12)}${'check CPU [ms]'.padStart(16)}${'process [ms]'.padStart(14)}${'simulations'.padStart(13)}${'max rel. error'.padStart(16)}  result`);
let failed = 0;
for (const { label: name, model, scenario: f, extra: more } of scenarios) {
  const check = [], cpu = [], proc = [];
  let last;
  for (let k = 0; k < runs; k++) {
    const extra = [...more, ...(htmlDir && k === 0 ? ['--html', join(htmlDir, `${name.replace(/\W+/g, '_')}.html`)] : [])];
    const t0 = performance.now();
    const r = spawnSync(process.execPath, [cli, 'crosscheck', `samples/${model}.saltus`, '--scenario', `samples/scenarios/${f}`, '--format', 'json', ...extra],
      { cwd: root, encoding: 'utf8', maxBuffer: 64 << 20 });
    proc.push(performance.now() - t0);
    try { last = JSON.parse(r.stdout); } catch { last = { status: 'unreadable', passed: false, timing: {} }; }
    last.exit = r.status;
    check.push(last.timing?.total_ms ?? NaN);
    cpu.push(last.timing?.cpu_ms ?? NaN);
  }
  const ok = last.exit === 0 && last.passed;
  if (!ok) failed++;
  const rel = typeof last.maxRelativeError === 'number' ? last.maxRelativeError.toExponential(2) : '—';
  figures.push({ name: `${name}: check wall`, value: Math.round(median(check)), unit: 'ms' }, { name: `${name}: check CPU`, value: Math.round(median(cpu)), unit: 'ms' });
  console.log(`${name.padEnd(18)}${median(check).toFixed(0).padStart(12)}${median(cpu).toFixed(0).padStart(16)}${median(proc).toFixed(0).padStart(14)}${String(last.timing?.simulations ?? '—').padStart(13)}${rel.padStart(16)}  ${ok ? 'pass' : `FAIL (${last.status}, exit ${last.exit})`}`);
}
if (process.env.BENCH_JSON) for (const f of figures) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'crosscheck', ...f }) + '\n');
process.exit(failed ? 1 : 0);
