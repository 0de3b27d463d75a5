// Runs the VS Code end-to-end checks (tests/e2e/vscode.e2e.mjs): code-server with the
// .vsix installed, a scratch copy of samples/ as the workspace, headless Chromium driven
// by playwright-core, then each check in order under its own time limit.
// Invariants: a failing check leaves a screenshot and the page's text under
// .e2e/run/failures/ and prints the language-server log; the browser and code-server's
// process group are always stopped, also when a check times out or setup fails.
import { spawnSync } from 'node:child_process';
import { cpSync, existsSync, mkdirSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import { join } from 'node:path';
import { CHECKS, Skip } from '../../tests/e2e/vscode.e2e.mjs';
import { VscodeUi } from '../../tests/e2e/vscodeUi.mjs';
import { startCodeServer } from './codeServer.mjs';
import { log, NODE24, ROOT } from './tools.mjs';

const CHECK_LIMIT_MS = 90_000;
const CHROMIUM_ARGS = ['--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run', '--disable-background-networking',
  '--disable-component-update', '--disable-sync', '--disable-dev-shm-usage'];

function withLimit(promise, ms, what) {
  let timer;
  return Promise.race([promise, new Promise((_, reject) => { timer = setTimeout(() => reject(new Error(`${what}: no result within ${ms / 1000} s`)), ms); })])
    .finally(() => clearTimeout(timer));
}

function slug(name) {
  return name.replace(/^vscode:\s*/, '').replace(/[^a-z0-9]+/gi, '-').replace(/^-|-$/g, '').toLowerCase().slice(0, 60);
}

/**
 * The oracle: the CLI of the build inside the .vsix: the packaged dist/cli.js when the .vsix
 * carries one, else a copy (taken now) of the repository's dist/cli.js, used only when
 * dist/server.js is byte for byte the packaged server (others may rebuild dist/ meanwhile).
 */
function oracleCli(extensionDir, dir) {
  const packaged = join(extensionDir, 'dist', 'cli.js');
  if (existsSync(packaged)) return packaged;
  const server = readFileSync(join(extensionDir, 'dist', 'server.js'));
  const cli = join(dir, 'cli.js');
  mkdirSync(dir, { recursive: true });
  cpSync(join(ROOT, 'dist', 'cli.js'), cli);
  if (!server.equals(readFileSync(join(ROOT, 'dist', 'server.js')))) {
    throw new Error('dist/ is not the build inside the .vsix (rebuilt since it was packed, or --vsix names an older one): the CLI would check another build than the one under test; run the e2e again');
  }
  return cli;
}

/**
 * @returns {Promise<{ name: string, status: 'pass'|'fail'|'skip', detail: string, ms: number }[]>}
 */
export async function runVscodeChecks({ vsix, scratch, tools, chromiumPath, screenshotsDir, only }) {
  const workspace = join(scratch, 'workspace');
  rmSync(scratch, { recursive: true, force: true });
  mkdirSync(scratch, { recursive: true });
  cpSync(join(ROOT, 'samples'), workspace, { recursive: true });
  const failures = join(scratch, 'failures');
  const results = [];
  let cs, context;
  try {
    cs = await startCodeServer({ entry: tools.codeServer, vsix, workspace, scratch });
    const extRoot = join(scratch, 'extensions');
    const extDirName = readdirSync(extRoot).find((d) => d.startsWith('saltus-dev.saltus-'));
    if (!extDirName) throw new Error(`the .vsix did not install into ${extRoot}`);
    const extensionDir = join(extRoot, extDirName);
    const manifest = JSON.parse(readFileSync(join(extensionDir, 'package.json'), 'utf8'));
    const cli = oracleCli(extensionDir, join(scratch, 'oracle'));
    // run by the Node that runs the language server (code-server's, Node 24): floating-point
    // results (e.g. a finite difference's last digits) differ between V8 versions
    const oracleNode = NODE24;
    const cliDiagnostics = (file) => {
      const r = spawnSync(oracleNode, [cli, 'check', join(workspace, file), '--format', 'json'], { encoding: 'utf8', timeout: 60_000 });
      if (!r.stdout) throw new Error(`the packaged CLI gave no JSON for ${file} (exit ${r.status}): ${r.stderr}`);
      return JSON.parse(r.stdout).files.flatMap((f) => f.diagnostics);
    };
    const { chromium } = createRequire(import.meta.url)(tools.playwrightDir);
    context = await chromium.launchPersistentContext(join(scratch, 'browser'), {
      executablePath: chromiumPath, headless: true, viewport: { width: 1280, height: 800 }, args: CHROMIUM_ARGS, timeout: 60_000,
    });
    const page = context.pages()[0] ?? (await context.newPage());
    const ui = new VscodeUi(page, { screenshotsDir });
    await withLimit(ui.open(cs.folderUrl), 90_000, 'opening the workbench');
    const runCli = (args) => spawnSync(oracleNode, [cli, ...args], { cwd: workspace, encoding: 'utf8', timeout: 60_000 });
    const t = { ui, manifest, extensionDir, workspace, scratch, cliDiagnostics, runCli, sample: (f) => readFileSync(join(workspace, f), 'utf8') };
    const checks = only === undefined ? CHECKS : CHECKS.filter((c) => new RegExp(only, 'i').test(c.name));
    if (checks.length === 0) throw new Error(`no VS Code check's name matches /${only}/i`);
    for (const check of checks) {
      const started = performance.now();
      const ms = () => Math.round(performance.now() - started);
      try {
        const detail = await withLimit(check.run(t), CHECK_LIMIT_MS, check.name);
        results.push({ name: check.name, status: 'pass', detail, ms: ms() });
      } catch (e) {
        if (e instanceof Skip) { results.push({ name: check.name, status: 'skip', detail: e.message, ms: ms() }); continue; }
        mkdirSync(failures, { recursive: true });
        const shot = join(failures, `${slug(check.name)}.png`);
        let shown = '';
        try { await page.screenshot({ path: shot }); } catch { /* the page may be gone */ }
        try { shown = await withLimit(ui.describe(), 10_000, 'describing the page'); } catch (d) { shown = `(could not read the page: ${d.message})`; }
        writeFileSync(join(failures, `${slug(check.name)}.txt`), `${e.stack ?? e}\n\n${shown}\n`);
        results.push({ name: check.name, status: 'fail', detail: `${e.message}\n--- the page showed ---\n${shown}\n--- screenshot: ${shot}`, ms: ms() });
        try { await page.keyboard.press('Escape'); await page.keyboard.press('Escape'); } catch { /* carry on */ }
      }
    }
  } catch (e) {
    results.push({ name: 'vscode: setup (code-server, .vsix, browser)', status: 'fail', detail: e.message, ms: 0 });
  } finally {
    if (results.some((r) => r.status === 'fail') && cs) {
      const logs = cs.extensionLogs();
      const file = join(failures, 'server-and-extension-host.log');
      mkdirSync(failures, { recursive: true });
      writeFileSync(file, logs);
      const saltus = logs.split(/(?=^--- )/m).filter((s) => /saltus/i.test(s.split('\n')[0]));
      process.stdout.write(`--- language server log (Saltus output channel${saltus.length ? '' : ': none found'}) ---\n${saltus.join('\n').slice(-4000)}\n--- full logs: ${file}\n`);
      if (existsSync(cs.logFile)) process.stdout.write(`--- code-server log (tail) ---\n${readFileSync(cs.logFile, 'utf8').slice(-1500)}\n`);
    }
    if (context) await withLimit(context.close(), 20_000, 'closing the browser').catch((e) => log(e.message));
    if (cs) await cs.stop();
  }
  return results;
}
