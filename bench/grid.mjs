#!/usr/bin/env node
// P6: how close the gradient of the generated network step is to the exact gradient of the
// model. For every sample scenario, `saltus crosscheck --timestep 0.1ms --format json` runs
// the grid semantics every generated target shares (server/src/grid/, tested against the
// NumPy and C runners to 1e-12) at dt = 0.1 ms, 0.05 ms and 0.025 ms beside the accurate
// event simulation; this prints, per scenario, the median and largest relative error of the
// gradient rows at 0.1 ms and the median observed order between 0.1 and 0.05 ms.
// The figure it replaces: kernels of one population with hand-written network glue were
// 41 % (median) and 59 % (max) off at dt = 0.1 ms on a 3 -> 2 -> 1 conductance network,
// converging at first order. Goals (docs/network-step.md): <= 1e-6 for linear
// time-invariant flows, <= 1e-3 for the others.
import { spawnSync } from 'node:child_process';
import { appendFileSync, existsSync, readdirSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const cli = join(root, 'dist', 'cli.js');
if (!existsSync(cli)) { console.error('bench/grid.mjs: dist/cli.js is missing; run npm run build first'); process.exit(2); }
const figure = (name, value, unit, goal) => {
  if (process.env.BENCH_JSON) appendFileSync(process.env.BENCH_JSON, JSON.stringify({ bench: 'grid', name, value, unit, ...(goal ? { goal } : {}) }) + '\n');
};
const median = (xs) => { const s = [...xs].sort((a, b) => a - b); return s.length ? (s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2) : NaN; };

const dir = join(root, 'samples', 'scenarios');
const scenarios = readdirSync(dir).filter((f) => f.endsWith('.json')).sort();
console.log('P6 the generated network step against the exact gradient, dt = 0.1 ms (before: 41 % median, 59 % max)');
console.log(`${'scenario'.padEnd(16)}${'map'.padEnd(24)}${'rows'.padStart(5)}${'median'.padStart(11)}${'max'.padStart(11)}${'order'.padStart(8)}`);
for (const f of scenarios) {
  const name = f.replace(/\.json$/, '');
  const model = join(root, 'samples', `${name}.saltus`);
  if (!existsSync(model)) continue;
  const r = spawnSync(process.execPath, [cli, 'crosscheck', model, '--scenario', join(dir, f), '--timestep', '0.1ms', '--format', 'json'], { cwd: root, encoding: 'utf8', maxBuffer: 1 << 26 });
  let g;
  try { g = JSON.parse(r.stdout).grid; } catch { g = undefined; }
  if (!g) { console.log(`${name.padEnd(16)}failed (exit ${r.status}): ${(r.stderr || '').trim().split('\n')[0]}`); continue; }
  const errs = g.rows.map((x) => x.errors[0]).filter((e) => e !== null);
  const orders = g.rows.map((x) => x.orders[0]).filter((o) => o !== null);
  const exact = Object.values(g.exact).every(Boolean);
  const subs = [...new Set(Object.values(g.substeps).map((s) => s[0]))].join('/');
  const map = exact ? 'exact' : `ETDRK4, ${subs} sub-steps`;
  const med = median(errs), max = Math.max(...errs);
  const order = orders.length ? median(orders) : NaN;
  console.log(`${name.padEnd(16)}${map.padEnd(24)}${String(g.rows.length).padStart(5)}${med.toExponential(1).padStart(11)}${max.toExponential(1).padStart(11)}${(Number.isFinite(order) ? order.toFixed(1) : '-').padStart(8)}`);
  figure(`${name}: max rel. error at 0.1 ms (ppm; before 590000)`, max * 1e6, 'ppm', exact ? '<= 1 ppm' : '<= 1000 ppm');
}
console.log('order: median of log2(e(dt) / e(dt/2)) over rows above rounding; "-" when every row is at rounding level (an exact map)');
