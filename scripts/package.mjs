// `npm run package`: builds dist/ and packs the extension into saltus-VERSION.vsix with
// @vscode/vsce, offline. vsce 4.x needs Node >= 22, so it is installed into .e2e/cache/vsce
// and run with a Node 24 taken from the npm registry (scripts/e2e/tools.mjs); the
// project's own dependencies and the system Node stay as they are.
// Invariants: vsce runs with --no-dependencies (dist/ bundles every runtime dependency) and
// under scripts/e2e/no-network.cjs, so any attempt to reach a marketplace or any other host
// fails the packaging; the finished .vsix is opened and checked: it must hold the bundles,
// grammar, icon, README, LICENSE and CHANGELOG, and no node_modules, sources or maps.
// README links: VS Code's extension page shows README images only from https: URLs. For a
// GitHub or GitLab `repository`, vsce rewrites relative links (docs/screenshots/...) to it;
// for any other host they are packed as they are (--no-rewrite-relative-links), so they
// render on the repository's own page and in a checkout, not on the extension page.
// Options: --no-build (use dist/ as it is), --out FILE. Prints the .vsix path last.
import { existsSync, readFileSync, statSync } from 'node:fs';
import { join, relative, resolve } from 'node:path';
import { listZip } from './e2e/zipList.mjs';
import { ensureNode24, ensureVsce, log, mustRun, NODE24, ROOT, runCommand } from './e2e/tools.mjs';

/** Paths (inside the .vsix, under extension/) that must be there. */
export const REQUIRED_IN_VSIX = [
  'extension/package.json',
  'extension/readme.md',
  'extension/changelog.md',
  'extension/LICENSE.txt',
  'extension/dist/client.js',
  'extension/dist/server.js',
  'extension/dist/cli.js',
  'extension/grammar/saltus.tmLanguage.json',
  'extension/grammar/language-configuration.json',
  'extension/grammar/snippets.json',
];

/** Activation events VS Code cannot infer from contributes. */
export const ALLOWED_ACTIVATION = ['onWebviewPanel:saltus.adjoint', 'workspaceContains:**/*.saltus'];

/** Entries that must not be packed: they are either bundled into dist/ or not for users. */
const FORBIDDEN_IN_VSIX = [
  [/^extension\/node_modules\//, 'node_modules (dist/ bundles the runtime dependencies)'],
  [/\.map$/, 'source maps'],
  [/\.ts$/, 'TypeScript sources'],
  [/^extension\/(server|client)\/src\//, 'sources'],
  [/^extension\/tests\//, 'tests'],
  [/^extension\/\.e2e\//, 'the e2e cache'],
  [/\.vsix$/, 'another .vsix'],
];

function parseArgs(argv) {
  const opts = { build: true, out: undefined };
  for (let i = 0; i < argv.length; i++) {
    if (argv[i] === '--no-build') opts.build = false;
    else if (argv[i] === '--out') opts.out = resolve(argv[++i] ?? '');
    else throw new Error(`package: unknown option ${argv[i]} (known: --no-build, --out FILE)`);
  }
  return opts;
}

/** Packing rules that vsce cannot combine with ours; returns a list of problems. */
export function ignoreFileProblems(pkg, vscodeignore) {
  const problems = [];
  if (vscodeignore !== undefined && Array.isArray(pkg.files) && pkg.files.length > 0) {
    problems.push('package.json has "files" and there is a .vscodeignore: vsce refuses to combine them; the .vsix contents come from .vscodeignore, so drop "files" (the package is private, never published to npm)');
  }
  return problems;
}

/** What the manifest must say before packing; returns a list of problems. */
export function manifestProblems(pkg) {
  const problems = [];
  if (!pkg.icon) problems.push('package.json has no "icon"');
  else if (!existsSync(join(ROOT, pkg.icon))) problems.push(`icon ${pkg.icon} does not exist (node media/make-icon.mjs draws it)`);
  // VS Code infers activation from contributes (onLanguage, commands); listed are only the
  // events it cannot infer: restoring the preview panel after a reload, and a workspace with
  // models (the test explorer and the check task, before any .saltus file is opened)
  const inferable = (Array.isArray(pkg.activationEvents) ? pkg.activationEvents : []).filter((e) => !ALLOWED_ACTIVATION.includes(e));
  if (inferable.length > 0) {
    problems.push(`activationEvents ${JSON.stringify(inferable)}: VS Code infers activation from contributes (onLanguage, commands); list only ${ALLOWED_ACTIVATION.join(', ')}`);
  }
  for (const w of pkg.contributes?.walkthroughs ?? []) {
    for (const s of w.steps ?? []) {
      for (const m of Object.values(s.media ?? {})) if (typeof m === 'string' && /\.(md|svg|png)$/.test(m) && !existsSync(join(ROOT, m))) problems.push(`walkthrough step ${s.id}: ${m} does not exist`);
    }
  }
  if (!pkg.repository) problems.push('package.json has no "repository"');
  if (!pkg.capabilities?.untrustedWorkspaces || !pkg.capabilities?.virtualWorkspaces) problems.push('capabilities.untrustedWorkspaces/virtualWorkspaces are not declared');
  for (const f of ['README.md', 'LICENSE', 'CHANGELOG.md']) if (!existsSync(join(ROOT, f))) problems.push(`${f} is missing`);
  return problems;
}

/** Problems with the packed file list (names as stored in the zip). */
export function contentProblems(names, pkg) {
  const problems = [];
  const lower = new Set(names.map((n) => n.toLowerCase()));
  const required = [...REQUIRED_IN_VSIX, ...(pkg.icon ? [`extension/${pkg.icon.replace(/^\.\//, '')}`] : [])];
  for (const r of required) if (!lower.has(r.toLowerCase())) problems.push(`missing from the .vsix: ${r}`);
  for (const n of names) {
    for (const [re, why] of FORBIDDEN_IN_VSIX) if (re.test(n)) { problems.push(`should not be in the .vsix (${why}): ${n}`); break; }
  }
  return problems;
}

async function main() {
  const opts = parseArgs(process.argv.slice(2));
  const pkg = JSON.parse(readFileSync(join(ROOT, 'package.json'), 'utf8'));
  const out = opts.out ?? join(ROOT, `${pkg.name}-${pkg.version}.vsix`);
  if (opts.build) {
    log('building dist/');
    await mustRun(process.execPath, [join(ROOT, 'scripts/build.mjs')], { timeoutMs: 300_000 });
  }
  if (pkg.icon && !existsSync(join(ROOT, pkg.icon)) && existsSync(join(ROOT, 'media/make-icon.mjs'))) {
    await mustRun(process.execPath, [join(ROOT, 'media/make-icon.mjs')], { timeoutMs: 60_000 });
  }
  const ignorePath = join(ROOT, '.vscodeignore');
  const before = [...manifestProblems(pkg), ...ignoreFileProblems(pkg, existsSync(ignorePath) ? readFileSync(ignorePath, 'utf8') : undefined)];
  if (before.length) throw new Error(`package: not ready to pack:\n  ${before.join('\n  ')}`);
  const repoUrl = typeof pkg.repository === 'string' ? pkg.repository : pkg.repository?.url ?? '';
  const vsceRewrites = /(^|[/@.])(github\.com|gitlab\.com)[/:]/i.test(repoUrl);
  if (!vsceRewrites) log(`README: relative links stay relative (${repoUrl || 'no repository'} is not on GitHub or GitLab)`);

  await ensureNode24();
  const vsce = await ensureVsce();
  log(`vsce package (Node ${(await mustRun(NODE24, ['--version'])).trim()}, offline)`);
  const guard = join(ROOT, 'scripts/e2e/no-network.cjs');
  const args = ['--require', guard, vsce, 'package', '--no-dependencies', ...(vsceRewrites ? [] : ['--no-rewrite-relative-links']), '--out', out];
  const r = await runCommand(NODE24, args, { timeoutMs: 300_000, env: { ...process.env, VSCE_TELEMETRY: 'off' } });
  process.stdout.write(r.out.split('\n').filter((l) => l.trim()).map((l) => `  vsce: ${l}\n`).join(''));
  if (r.out.includes('no-network guard')) throw new Error('package: vsce tried to reach the network (see above)');
  if (r.code !== 0 || !existsSync(out)) throw new Error(`package: vsce failed (exit ${r.code})`);

  const entries = listZip(out);
  const problems = contentProblems(entries.map((e) => e.name), pkg);
  if (problems.length) throw new Error(`package: ${relative(ROOT, out)} is not right:\n  ${problems.join('\n  ')}`);
  const kib = (statSync(out).size / 1024).toFixed(0);
  log(`packed ${entries.length} files, ${kib} KiB: ${entries.map((e) => e.name.replace(/^extension\//, '')).filter((n) => !n.startsWith('dist/katex/fonts/')).join(', ')} (+ KaTeX fonts)`);
  console.log(out);
}

if (process.argv[1] && resolve(process.argv[1]) === resolve(import.meta.filename ?? '')) {
  main().catch((e) => { console.error(e instanceof Error ? e.message : String(e)); process.exit(1); });
}
