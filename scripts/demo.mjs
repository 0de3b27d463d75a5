// `npm run demo`: a tour of the CLI on the project's samples/. Builds dist/ first when it is
// missing. Step 1 checks every samples/*.saltus file and shows the report; the demo passes
// when the only error diagnostics are in samples/mistakes.saltus (which exists to show them)
// and that file does have errors. Exit 0 on success, 1 otherwise.
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

// --- LEAD: further steps go here --------------------------------------------------------
// `saltus adjoint`, `saltus step` and the gradient check on the samples, each as a heading,
// a saltus(...) call, and a push onto `failures` when its result is not what it should be.

heading('demo result');
if (failures.length > 0) {
  for (const f of failures) console.log(`FAIL ${f}`);
  process.exit(1);
}
console.log('OK: every sample checks as expected');
