#!/usr/bin/env node
// npm run fuzz [-- --cases N --workers W --seed S]: the long fuzz run. Runs the fuzz suites
// (tests/fuzz.test.ts, tests/fuzz-models.test.ts) in W parallel vitest processes, each with its
// own seed and FUZZ_SCALE chosen so that all of them together run at least N cases (default
// 100,000), every sample truncation shared out between them; then prints the counts. A failing
// case is saved by the suites as tests/regressions/<kind>-<hash>.saltus (FUZZ_SAVE=1), which
// the regression suite runs from then on. Exit status: 0 when every worker passed.
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync } from 'node:fs';
import { availableParallelism, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';

const ROOT = join(fileURLToPath(new URL('.', import.meta.url)), '..');
const VITEST = join(ROOT, 'node_modules', 'vitest', 'vitest.mjs');
/** Cases one worker runs per unit of FUZZ_SCALE (the suites' base run counts: 1000 + 1000 + 250 + 83), truncations aside. */
const CASES_PER_SCALE = 2333;

function option(name, fallback) {
  const i = process.argv.indexOf(`--${name}`);
  if (i < 0) return fallback;
  const v = Number(process.argv[i + 1]);
  if (!Number.isFinite(v) || v <= 0) { console.error(`fuzz: --${name} needs a positive number`); process.exit(2); }
  return v;
}

const target = option('cases', 100_000);
const workers = Math.max(1, Math.floor(option('workers', Math.max(1, Math.min(availableParallelism(), 16)))));
const seed = Math.floor(option('seed', 1 + (Date.now() % 1_000_000)));
const scale = Math.max(1, Math.ceil(target / (workers * CASES_PER_SCALE)));
if (!existsSync(VITEST)) { console.error('fuzz: vitest is not installed (npm install)'); process.exit(2); }

const before = new Set(readdirSync(join(ROOT, 'tests', 'regressions')));
const dir = mkdtempSync(join(tmpdir(), 'saltus-fuzz-'));
const report = join(dir, 'counts.jsonl');
console.log(`fuzz: ${workers} worker(s), FUZZ_SCALE ${scale}, seeds ${seed}..${seed + workers - 1}, target >= ${target.toLocaleString('en')} cases`);
const t0 = performance.now();

function worker(k) {
  return new Promise((resolve) => {
    const env = { ...process.env, FUZZ_SCALE: String(scale), FUZZ_SEED: String(seed + k), FUZZ_SHARD: `${k}/${workers}`, FUZZ_REPORT: report, FUZZ_SAVE: '1' };
    const child = spawn(process.execPath, [VITEST, 'run', 'tests/fuzz.test.ts', 'tests/fuzz-models.test.ts', '--reporter=dot'], { cwd: ROOT, env, stdio: ['ignore', 'pipe', 'pipe'] });
    let out = '';
    child.stdout.on('data', (d) => { out += d; });
    child.stderr.on('data', (d) => { out += d; });
    child.on('close', (code) => resolve({ k, code, out }));
  });
}

const results = await Promise.all(Array.from({ length: workers }, (_, k) => worker(k)));
const seconds = (performance.now() - t0) / 1000;
const totals = {};
if (existsSync(report)) {
  for (const line of readFileSync(report, 'utf8').split('\n').filter(Boolean)) {
    const { suite, counts } = JSON.parse(line);
    for (const [key, v] of Object.entries(counts)) {
      const name = `${suite}.${key}`;
      totals[name] = key === 'slowestMs' ? Math.max(totals[name] ?? 0, v) : (totals[name] ?? 0) + v;
    }
  }
}
rmSync(dir, { recursive: true, force: true });

const CASE_KEYS = ['fuzz.mutations', 'fuzz.truncations', 'fuzz.tokenStreams', 'fuzz-models.models', 'fuzz-models.resetPairs'];
const cases = CASE_KEYS.reduce((n, k) => n + (totals[k] ?? 0), 0);
console.log('\ncounts (all workers):');
for (const [k, v] of Object.entries(totals)) console.log(`  ${k.padEnd(36)} ${v.toLocaleString('en').padStart(12)}`);
console.log(`  ${'cases run'.padEnd(36)} ${cases.toLocaleString('en').padStart(12)}   (${seconds.toFixed(0)} s, ${(cases / seconds).toFixed(0)} cases/s)`);

const failed = results.filter((r) => r.code !== 0);
const saved = readdirSync(join(ROOT, 'tests', 'regressions')).filter((f) => f.endsWith('.saltus') && !before.has(f));
for (const r of failed) console.log(`\nworker ${r.k} (seed ${seed + r.k}) FAILED:\n${r.out.split('\n').filter((l) => /FAIL|Error|Counterexample|failed|expected|✗|×/.test(l)).slice(0, 40).join('\n')}`);
if (saved.length) console.log(`\nsaved failing cases (tests/regressions/): ${saved.join(', ')}`);
if (!failed.length && cases < target) console.log(`\nnote: ${cases} cases ran, fewer than the ${target} asked for`);
console.log(failed.length ? `\nfuzz: ${failed.length} worker(s) failed` : '\nfuzz: no invariant broken');
process.exit(failed.length || cases < target ? 1 : 0);
