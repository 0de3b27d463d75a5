// `npm run demo`: a tour of the CLI on the project's samples/. Builds dist/ first when it is
// missing. Step 1 checks every samples/*.saltus file and shows the report; the demo passes
// when the only error diagnostics are in samples/mistakes.saltus (which exists to show them)
// and that file does have errors. The last step trains a two-layer network of the generated
// PyTorch layers on an invented sensor task (scripts/train_demo.py: the loss must fall and the
// test accuracy rise well above chance); without a python3 that imports torch it prints a SKIP
// line saying so. Exit 0 on success, 1 otherwise.
import { spawnSync } from 'node:child_process';
import { existsSync, readdirSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const cli = join(root, 'dist/cli.js');
const MISTAKES = 'samples/mistakes.saltus';

function heading(text) {
  console.log(`\n=== ${text} ===\n`);
}

function saltus(args, capture) {
  const r = spawnSync(process.execPath, [cli, ...args], { cwd: root, encoding: 'utf8', stdio: capture ? 'pipe' : 'inherit' });
  if (r.error) throw r.error;
  return r;
}

const failures = [];

if (!existsSync(cli)) {
  const b = spawnSync(process.execPath, [join(root, 'scripts/build.mjs')], { cwd: root, stdio: 'inherit' });
  if (b.status !== 0) process.exit(1);
}

const samples = existsSync(join(root, 'samples'))
  ? readdirSync(join(root, 'samples')).filter((f) => f.endsWith('.saltus')).sort().map((f) => `samples/${f}`)
  : [];
if (samples.length === 0) {
  console.error('demo: no samples/*.saltus files to check');
  process.exit(1);
}

// --- Step 1: check every sample --------------------------------------------------------
heading(`saltus check ${samples.join(' ')}`);
const shown = saltus(['check', ...samples], false);
console.log(`(exit status ${shown.status}; 1 is expected: ${MISTAKES} holds deliberate mistakes)`);
const json = saltus(['check', '--format', 'json', ...samples], true);
if (json.status !== 0 && json.status !== 1) {
  failures.push(`check failed to run (exit ${json.status}): ${json.stderr.trim()}`);
} else {
  const report = JSON.parse(json.stdout);
  for (const f of report.files) {
    const errors = f.diagnostics.filter((d) => d.severity === 'error');
    if (f.path === MISTAKES && errors.length === 0) failures.push(`${MISTAKES} was expected to have errors but has none`);
    if (f.path !== MISTAKES && errors.length > 0) failures.push(`${f.path} has ${errors.length} error(s); only ${MISTAKES} should`);
  }
  if (!report.files.some((f) => f.path === MISTAKES)) failures.push(`${MISTAKES} is missing`);
}

// Everything the demo writes goes to demo-output/ (ignored by git).
const out = join(root, 'demo-output');
const good = samples.filter((s) => s !== MISTAKES);
const expectExit = (what, r, code = 0) => { if (r.status !== code) failures.push(`${what} exited ${r.status}${r.stderr ? ': ' + r.stderr.trim().split('\n')[0] : ''}`); };

// --- Step 2: the derived EventProp adjoint ---------------------------------------------
heading('saltus adjoint samples/adaptive_lif.saltus   (and a typeset page per sample)');
expectExit('adjoint', saltus(['adjoint', 'samples/adaptive_lif.saltus'], false));
for (const s of good) {
  const name = s.replace(/^samples\//, '').replace(/\.saltus$/, '');
  expectExit(`adjoint ${s}`, saltus(['adjoint', s, '--format', 'json', '--html', join(out, 'adjoint', `${name}.html`)], true));
}
console.log(`typeset adjoint pages: ${join('demo-output', 'adjoint')}/*.html`);

// --- Step 3: the step map at each file's timestep -------------------------------------
heading('saltus step samples/adex.saltus');
expectExit('step', saltus(['step', 'samples/adex.saltus'], false));
for (const s of good) expectExit(`step ${s}`, saltus(['step', s, '--format', 'json'], true));

// --- Step 4: generated code ------------------------------------------------------------
heading('saltus generate samples/lif_current.saltus --target c   (C, CUDA, NumPy and PyTorch for every sample)');
for (const s of good) {
  const name = s.replace(/^samples\//, '').replace(/\.saltus$/, '');
  for (const target of ['c', 'cuda', 'numpy', 'torch']) {
    const r = saltus(['generate', s, '--target', target, '--out', join(out, 'generated', target, name), '--force'], s === 'samples/lif_current.saltus' && target === 'c' ? false : true);
    expectExit(`generate ${target} ${s}`, r);
  }
}
console.log(`generated code: ${join('demo-output', 'generated')}/{c,cuda,numpy,torch}/<sample>/`);

// --- Step 5: gradient cross-check against finite differences, one scenario per sample ---------
const scenarioDir = join(root, 'samples', 'scenarios');
const scenarios = existsSync(scenarioDir) ? readdirSync(scenarioDir).filter((f) => f.endsWith('.json')).sort() : [];
heading(`saltus crosscheck: ${scenarios.length} scenario(s) in samples/scenarios/`);
for (const sc of scenarios) {
  const sample = `samples/${sc.replace(/\.json$/, '')}.saltus`;
  if (!existsSync(join(root, sample))) { failures.push(`scenario ${sc} has no sample ${sample}`); continue; }
  const r = saltus(['crosscheck', sample, '--scenario', `samples/scenarios/${sc}`, '--html', join(out, 'crosscheck', sc.replace(/\.json$/, '.html'))], false);
  expectExit(`crosscheck ${sc}`, r);
}
if (scenarios.length) console.log(`cross-check reports: ${join('demo-output', 'crosscheck')}/*.html`);

// --- Step 6: train a network of generated PyTorch layers ----------------------------------
heading('PyTorch: two generated layers trained with Adam on an invented fan-bearing sensor task');
const torchPython = ['python3', '/usr/bin/python3'].find((py) => spawnSync(py, ['-c', 'import torch'], { encoding: 'utf8' }).status === 0);
if (!torchPython) {
  console.log('SKIP PyTorch training demo: neither python3 on PATH nor /usr/bin/python3 imports torch (Debian: apt-get install python3-torch)');
} else {
  const pkg = join(out, 'generated', 'torch', 'lif_current');
  const r = spawnSync(torchPython, [join(root, 'scripts', 'train_demo.py'), pkg, join(out, 'training')], { cwd: root, stdio: 'inherit' });
  expectExit('PyTorch training demo (scripts/train_demo.py)', r);
  if (r.status === 0) console.log(`learning curve: ${join('demo-output', 'training', 'learning-curve.svg')}`);
}

heading('demo result');
if (failures.length > 0) {
  for (const f of failures) console.log(`FAIL ${f}`);
  process.exit(1);
}
console.log('OK: every sample checks as expected');
