// `npm run test:e2e`: Saltus in editors nobody here wrote.
//  1. installs what is missing: Debian chromium, neovim and build tools (apt-get); Node 24,
//     code-server 4.139.1, playwright-core 1.65.1 and @vscode/vsce into .e2e/cache/;
//  2. packs the .vsix (`npm run package`), unless --vsix FILE names one to test;
//  3. Neovim 0.7.2's built-in LSP client against `node dist/cli.js lsp --stdio`
//     (tests/e2e/neovim.e2e.mjs);
//  4. real VS Code (code-server in headless Chromium) with the .vsix installed
//     (tests/e2e/vscode.e2e.mjs); screenshots of passing checks go to .e2e/out/screenshots/.
// Prints one line per check and, last, exactly `E2E: N passed, M failed`; exits 1 when
// anything failed (a setup step that fails counts as a failed check).
// Options: --vsix FILE, --only neovim|vscode, --check REGEX (run only the VS Code checks
// whose name matches; for working on some), --screenshots DIR (where screenshots go),
// --update-screenshots (write them over the committed ones in docs/screenshots/; the same
// as SALTUS_E2E_UPDATE_SCREENSHOTS=1): only on purpose, after looking at them.
// Invariants: the whole run is bounded (RUN_LIMIT_MS); every process it starts is stopped
// before it exits; scratch files live under .e2e/run/ and outputs under .e2e/out/ (both
// ignored by git), so a run leaves the work tree as it was unless --update-screenshots.
import { existsSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { runNeovimChecks } from '../../tests/e2e/neovim.e2e.mjs';
import { ensureDebianPackages, ensureVscodeTools, E2E_DIR, log, mustRun, ROOT } from './tools.mjs';
import { runVscodeChecks } from './vscodeRunner.mjs';

const RUN_LIMIT_MS = 25 * 60_000;
const CHROMIUM = '/usr/bin/chromium';

/** The committed screenshots (docs/screenshots/), written only with --update-screenshots. */
export const COMMITTED_SCREENSHOTS = join(ROOT, 'docs', 'screenshots');
/** Where a run's screenshots go by default (ignored by git). */
export const RUN_SCREENSHOTS = join(E2E_DIR, 'out', 'screenshots');

export function parseArgs(argv, env = process.env) {
  const o = { vsix: undefined, only: undefined, check: undefined, screenshots: RUN_SCREENSHOTS };
  if (env.SALTUS_E2E_UPDATE_SCREENSHOTS === '1') o.screenshots = COMMITTED_SCREENSHOTS;
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (a === '--vsix') o.vsix = resolve(argv[++i] ?? '');
    else if (a === '--only') o.only = argv[++i];
    else if (a === '--screenshots') o.screenshots = resolve(argv[++i] ?? '');
    else if (a === '--update-screenshots') o.screenshots = COMMITTED_SCREENSHOTS;
    else if (a === '--check') o.check = argv[++i] ?? '';
    else throw new Error(`unknown option ${a} (known: --vsix FILE, --only neovim|vscode, --screenshots DIR, --update-screenshots, --check REGEX)`);
  }
  if (o.only && !['neovim', 'vscode'].includes(o.only)) throw new Error(`--only takes neovim or vscode, not ${o.only}`);
  return o;
}

async function step(results, name, fn) {
  const started = performance.now();
  try {
    return await fn();
  } catch (e) {
    results.push({ name, status: 'fail', detail: e instanceof Error ? e.message : String(e), ms: Math.round(performance.now() - started) });
    return undefined;
  }
}

function report(results) {
  for (const r of results) {
    const mark = r.status === 'pass' ? 'PASS' : r.status === 'skip' ? 'SKIP' : 'FAIL';
    const [first, ...rest] = String(r.detail).split('\n');
    process.stdout.write(`${mark} ${r.name} (${(r.ms / 1000).toFixed(1)} s): ${first}\n${rest.map((l) => `     ${l}\n`).join('')}`);
  }
  const passed = results.filter((r) => r.status === 'pass').length;
  const failed = results.filter((r) => r.status === 'fail').length;
  return { passed, failed };
}

async function main() {
  const opts = parseArgs(process.argv.slice(2));
  const results = [];
  const wantNeovim = opts.only !== 'vscode', wantVscode = opts.only !== 'neovim';
  const debian = [];
  if (wantNeovim) debian.push({ pkg: 'neovim', marker: 'nvim' });
  if (wantVscode) {
    debian.push({ pkg: 'chromium', marker: CHROMIUM });
    // code-server's native modules compile against Node 24 (kerberos needs the krb5 headers)
    debian.push({ pkg: 'build-essential', marker: 'g++' }, { pkg: 'python3', marker: 'python3' },
      { pkg: 'pkg-config', marker: 'pkg-config' }, { pkg: 'libkrb5-dev', marker: '/usr/include/krb5.h' });
  }
  await step(results, 'setup: Debian packages', () => ensureDebianPackages(debian));

  let vsix = opts.vsix;
  if (wantVscode && !vsix) {
    vsix = await step(results, 'setup: npm run package', async () => {
      const out = await mustRun(process.execPath, [join(ROOT, 'scripts', 'package.mjs')], { timeoutMs: 600_000 });
      process.stdout.write(out.split('\n').filter((l) => /^\[|vsce: .*(DONE|WARNING|ERROR)/.test(l)).map((l) => `  ${l}\n`).join(''));
      const file = out.trim().split('\n').pop();
      if (!file || !existsSync(file)) throw new Error(`npm run package did not name a .vsix:\n${out.slice(-2000)}`);
      return file;
    });
  }
  if (wantNeovim) {
    if (!existsSync(join(ROOT, 'dist', 'cli.js'))) await step(results, 'setup: build', () => mustRun(process.execPath, [join(ROOT, 'scripts', 'build.mjs')], { timeoutMs: 300_000 }));
    log('Neovim 0.7.2 built-in LSP client against node dist/cli.js lsp --stdio');
    const nv = await step(results, 'neovim: run', () => runNeovimChecks({ scratch: join(E2E_DIR, 'run', 'neovim') }));
    if (nv) results.push(...nv);
  }
  if (wantVscode && vsix) {
    const tools = await step(results, 'setup: code-server and playwright-core', () => ensureVscodeTools());
    if (tools) {
      log('real VS Code (code-server) in headless Chromium');
      results.push(...(await runVscodeChecks({ vsix, scratch: join(E2E_DIR, 'run', 'vscode'), tools, chromiumPath: CHROMIUM, screenshotsDir: opts.screenshots, only: opts.check })));
    }
  }
  const { passed, failed } = report(results);
  log(`done; scratch files in ${join(E2E_DIR, 'run')}; screenshots in ${opts.screenshots}${opts.screenshots === COMMITTED_SCREENSHOTS ? ' (the committed ones: review the diff)' : ''}`);
  console.log(`E2E: ${passed} passed, ${failed} failed`);
  return failed === 0 && passed > 0 ? 0 : 1;
}

if (process.argv[1] && resolve(process.argv[1]) === resolve(import.meta.filename ?? '')) {
  const limit = setTimeout(() => {
    console.log(`e2e: the whole run took longer than ${RUN_LIMIT_MS / 60_000} min; stopping`);
    console.log('E2E: 0 passed, 1 failed');
    process.exit(1); // the 'exit' handlers kill code-server's group; children of runCommand are detached groups killed on timeout
  }, RUN_LIMIT_MS);
  limit.unref();
  main().then((code) => { process.exitCode = code; }, (e) => {
    console.error(e instanceof Error ? e.stack : String(e));
    console.log('E2E: 0 passed, 1 failed');
    process.exitCode = 1;
  });
}
