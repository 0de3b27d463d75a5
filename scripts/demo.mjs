// `npm run demo`: a tour of the CLI on the project's samples/. Builds dist/ first when it is
// missing. Step 1 checks every samples/*.saltus file and shows the report; the demo passes
// when the only error diagnostics are in samples/mistakes.saltus (which exists to show them)
// and that file does have errors. Step 7 trains a two-layer network of the generated
// PyTorch layers on an invented sensor task (scripts/train_demo.py: the loss must fall and the
// test accuracy rise well above chance); without a python3 that imports torch it prints a SKIP
// line saying so; then the LIF network scenario trains by the generated PyTorch code's e-prop
// (the loss must fall; skipped with a line without torch). Exit 0 on success, 1 otherwise.
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

// --- Step 6: one network through the generated grid step, against the exact gradients ---
// The LIF sample's scenario (a 2 -> 2 -> 1 network) runs in the generated NumPy runner and,
// where gcc exists, in the generated C runner at dt = 0.1 ms; each gradient is compared with
// the exact one of the accurate event simulation (`saltus crosscheck`). The flow is linear
// time-invariant, so the generated map is exact and the bound is 1e-6 relative.
const NET = 'samples/scenarios/lif_current.json', NET_MODEL = 'samples/lif_current.saltus', NET_DT = '0.1ms', NET_BOUND = 1e-6;
heading(`the network step: ${NET_MODEL} on ${NET} at dt = ${NET_DT}, generated NumPy and C against the exact gradients`);
const pythonWith = (mods) => ['python3', '/usr/bin/python3'].find((py) => spawnSync(py, ['-c', `import ${mods}`]).status === 0);
const exact = saltus(['crosscheck', NET_MODEL, '--scenario', NET, '--format', 'json'], true);
if (exact.status !== 0) failures.push(`crosscheck of ${NET} exited ${exact.status}`);
else {
  const ref = JSON.parse(exact.stdout);
  const compareRunner = (who, stdout) => {
    const r = JSON.parse(stdout);
    const rel = (a, b) => Math.abs(a - b) / Math.max(Math.abs(b), 1e-300);
    let worst = 0, worstAt = '';
    for (const g of ref.gradients) {
      const e = rel(r.weights[g.projection][g.to][g.from], g.adjoint);
      if (e > worst) { worst = e; worstAt = `dL/dw ${g.fromPopulation}[${g.from}] -> ${g.toPopulation}[${g.to}]`; }
    }
    for (const p of ref.params) {
      const e = rel(r.params[`${p.population}.${p.name}`], p.adjoint);
      if (e > worst) { worst = e; worstAt = `dL/d${p.name} of ${p.population}`; }
    }
    const rows = ref.gradients.length + ref.params.length;
    console.log(`${who.padEnd(6)} loss ${r.loss.toPrecision(10)} (exact ${ref.loss.toPrecision(10)}), ${rows} gradients, largest relative difference ${worst.toExponential(1)} (${worstAt})`);
    if (!(worst <= NET_BOUND)) failures.push(`${who} network step differs from the exact gradient by ${worst.toExponential(2)} at ${worstAt}`);
  };
  const py = pythonWith('numpy');
  if (!py) console.log('NumPy: skipped: no python3 on this machine imports numpy');
  else {
    const dir = join(out, 'network', 'numpy');
    expectExit('generate numpy --network', saltus(['generate', NET_MODEL, '--target', 'numpy', '--network', NET, '--out', dir, '--force'], true));
    const r = spawnSync(py, ['run.py', join(root, NET), '--dt', NET_DT, '--format', 'json'], { cwd: dir, encoding: 'utf8' });
    if (r.status !== 0) failures.push(`NumPy runner exited ${r.status}: ${r.stderr.trim().split('\n').pop()}`);
    else compareRunner('NumPy', r.stdout);
  }
  if (spawnSync('gcc', ['--version']).status !== 0) console.log('C: skipped: gcc is not installed');
  else {
    const dir = join(out, 'network', 'c');
    expectExit('generate c --network', saltus(['generate', NET_MODEL, '--target', 'c', '--network', NET, '--out', dir, '--force'], true));
    const sources = readdirSync(dir).filter((f) => f.endsWith('.c'));
    const cc = spawnSync('gcc', ['-std=c99', '-O2', '-o', 'saltus_run', ...sources, '-lm'], { cwd: dir, encoding: 'utf8' });
    if (cc.status !== 0) failures.push(`gcc failed on the generated C runner: ${cc.stderr.trim().split('\n')[0]}`);
    else {
      const r = spawnSync(join(dir, 'saltus_run'), [join(root, NET), '--dt', NET_DT, '--format', 'json'], { cwd: dir, encoding: 'utf8' });
      if (r.status !== 0) failures.push(`C runner exited ${r.status}: ${r.stderr.trim()}`);
      else compareRunner('C', r.stdout);
    }
  }
}

// --- Step 7: train a network of generated PyTorch layers ----------------------------------
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

// --- Step 8: the same network scenario trained by e-prop ---------------------------------
// The LIF sample's scenario of step 6, now trained by the generated PyTorch package's e-prop
// (`run.py --rule eprop --epochs`, docs/eprop.md "Networks"): eligibility traces per synapse,
// the readout's learning signal, gradient descent on every projection; the loss must fall.
heading(`e-prop: ${NET} trained by the generated PyTorch code's e-prop (run.py --rule eprop)`);
if (!torchPython) {
  console.log('SKIP e-prop training demo: neither python3 on PATH nor /usr/bin/python3 imports torch (Debian: apt-get install python3-torch)');
} else {
  const dir = join(out, 'network', 'torch');
  expectExit('generate torch --network', saltus(['generate', NET_MODEL, '--target', 'torch', '--network', NET, '--out', dir, '--force'], true));
  const r = spawnSync(torchPython, ['run.py', join(root, NET), '--dt', NET_DT, '--rule', 'eprop', '--epochs', '6', '--lr', '3', '--format', 'json'], { cwd: dir, encoding: 'utf8' });
  if (r.status !== 0) failures.push(`e-prop training (run.py --rule eprop) exited ${r.status}: ${r.stderr.trim().split('\n').pop()}`);
  else {
    const losses = JSON.parse(r.stdout).losses;
    console.log(`e-prop losses per epoch: ${losses.map((l) => l.toExponential(3)).join(' ')}`);
    if (!(losses.at(-1) < losses[0])) failures.push(`e-prop training did not lower the loss (${losses[0]} -> ${losses.at(-1)})`);
  }
}

heading('demo result');
if (failures.length > 0) {
  for (const f of failures) console.log(`FAIL ${f}`);
  process.exit(1);
}
console.log('OK: every sample checks as expected');
