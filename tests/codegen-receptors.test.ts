// Receptors (several incoming blocks, projections `via` one of them) in generated code: the
// NumPy runner, the PyTorch run.py (the Network module), the C runner (gcc, strict flags) and
// the CUDA runner's host path on the receptors sample scenario (the same pair of populations projected into
// both blocks) agrees with Saltus's own grid simulator (server/src/grid/, checked against
// finite differences and the exact gradient of the accurate simulator in
// tests/receptors.test.ts) to 1e-12 relative in float64. Scenario data: invented pump-sensor
// spike patterns.
import { spawnSync } from 'node:child_process';
import { mkdirSync, mkdtempSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { generateFiles, writeGenerated } from '../server/src/codegen';
import { numpyPython, runPython, torchPython } from './helpers/python';
import { type RunnerReport, runNumpyRunner, compareWithGrid, sampleNetwork } from './helpers/gridCompare';

const work = mkdtempSync(join(tmpdir(), 'saltus-receptors-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));
const python = numpyPython();

const runNumpy = (name: string, modelText: string, netJson: unknown, dt: string): RunnerReport =>
  runNumpyRunner(python!, join(work, name), name, modelText, netJson, dt);

describe.skipIf(!python)('NumPy target with receptors', () => {
  test('receptors sample scenario at dt = 0.1 ms: the same spikes, loss and gradients as the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    expect(net.projections.map((p) => p.receptor ?? 0)).toEqual([0, 1, 1, 0]);
    const r = compareWithGrid('NumPy runner', 'receptors', net, 1e-4, runNumpy('receptors', text, json, '0.1ms'));
    expect(r.spikes).toBeGreaterThan(3);
  }, 300_000);

  test('a projection without "via" into a model with several blocks stops the runner with a message', () => {
    const { text, json } = sampleNetwork('receptors');
    const bad = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    delete bad.projections[1]!.via;
    expect(() => runNumpy('receptors_novia', text, bad, '0.1ms')).toThrow(/projections\[1\]: Balanced has 2 incoming blocks \(w_exc, w_inh\)/);
  }, 300_000);
});

const hasGcc = spawnSync('gcc', ['--version']).status === 0;

function runC(name: string, text: string, netJson: unknown, dt: string, float = false): RunnerReport {
  const dir = join(work, `c_${name}`);
  const g = generateFiles(analyse(text), { target: 'c', network: netJson, float, source: `${name}.saltus` });
  expect(g.errors).toEqual([]);
  mkdirSync(dir, { recursive: true });
  for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
  const sources = readdirSync(dir).filter((f) => f.endsWith('.c'));
  const cc = spawnSync('gcc', ['-std=c99', '-O2', '-Wall', '-Wextra', '-Werror', '-pedantic', ...sources, '-lm', '-o', 'saltus_run'], { cwd: dir, encoding: 'utf8' });
  if (cc.status !== 0 || cc.stderr) throw new Error(`gcc failed:\n${cc.stderr}`);
  writeFileSync(join(dir, 'net.json'), JSON.stringify(netJson));
  const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', dt, '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0) throw new Error(`saltus_run failed (${r.status}):\n${r.stderr}`);
  return JSON.parse(r.stdout) as RunnerReport;
}

describe.skipIf(!hasGcc)('C target with receptors', () => {
  test('receptors sample scenario at dt = 0.1 ms: the same spikes, loss and gradients as the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    const r = compareWithGrid('C runner', 'receptors', net, 1e-4, runC('receptors', text, json, '0.1ms'));
    expect(r.spikes).toBeGreaterThan(3);
  }, 120_000);

  test('a projection without "via" into a model with several blocks stops the runner with a message', () => {
    const { text, json } = sampleNetwork('receptors');
    const bad = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    delete bad.projections[1]!.via;
    expect(() => runC('receptors_novia', text, bad, '0.1ms')).toThrow(/projections\[1\]: Balanced has several incoming blocks/);
    const wrong = JSON.parse(JSON.stringify(json)) as { projections: Record<string, unknown>[] };
    wrong.projections[1]!.via = 'w_exc';
    expect(() => runC('receptors_twice', text, wrong, '0.1ms')).toThrow(/projections\[1\]: sensor -> hid is projected twice/);
  }, 120_000);
});

const hasNvcc = spawnSync('nvcc', ['--version']).status === 0;

describe.skipIf(!hasNvcc)('CUDA target with receptors: nvcc, and the runner\'s host path', () => {
  test('saltus_run.cu --host (the __host__ __device__ runtime on the CPU, kernels by model id and block) agrees with the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    const dir = join(work, 'cuda_receptors');
    const g = generateFiles(analyse(text), { target: 'cuda', network: json, source: 'receptors.saltus' });
    expect(g.errors).toEqual([]);
    mkdirSync(dir, { recursive: true });
    for (const f of g.files) writeFileSync(join(dir, f.name), f.content);
    const b = spawnSync('nvcc', ['-O2', '-Werror', 'all-warnings', '-Xcompiler', '-Wall,-Wextra', '-o', 'saltus_run', 'saltus_run.cu'], { cwd: dir, encoding: 'utf8' });
    expect(b.status, b.stderr).toBe(0);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = spawnSync(join(dir, 'saltus_run'), ['net.json', '--dt', '0.1ms', '--format', 'json', '--host'], { cwd: dir, encoding: 'utf8' });
    expect(r.status, r.stderr).toBe(0);
    compareWithGrid('CUDA runner (host)', 'receptors', net, 1e-4, JSON.parse(r.stdout) as RunnerReport);
  }, 600_000);
});

const torch = torchPython();

describe.skipIf(!torch)('PyTorch target with receptors', () => {
  test('run.py --device cpu (the Network module) on the receptors sample scenario agrees with the grid', () => {
    const { text, json, net } = sampleNetwork('receptors');
    const dir = join(work, 'torch_receptors');
    const g = generateFiles(analyse(text), { target: 'torch', network: json, source: 'receptors.saltus' });
    expect(g.errors).toEqual([]);
    expect(writeGenerated(dir, g.files, { force: true }).errors).toEqual([]);
    writeFileSync(join(dir, 'net.json'), JSON.stringify(json));
    const r = JSON.parse(runPython(torch!, ['run.py', 'net.json', '--dt', '0.1ms', '--format', 'json', '--device', 'cpu'], dir)) as RunnerReport;
    compareWithGrid('torch run.py', 'receptors', net, 1e-4, r);
  }, 600_000);
});
