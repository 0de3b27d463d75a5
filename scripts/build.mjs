// Builds the three bundles the extension and the CLI ship, plus the KaTeX assets:
//   dist/client.js  VS Code extension (client/src/extension.ts), `vscode` left external
//   dist/cli.js     the `saltus` command (server/src/cli/main.ts), executable, with a shebang;
//                   `saltus lsp --stdio` makes it a language-server entry as well
//   dist/server.js  the language server the client starts over node IPC: a small loader that runs
//                   dist/cli.js as `saltus lsp` through a V8 code cache (server/src/boot/serverEntry.ts;
//                   one copy of the server code, not two)
//   dist/katex.js   KaTeX, which dist/cli.js loads on first use (not at start)
//   dist/katex/     katex.min.css and its .woff2 fonts, for a webview
// Invariants: CommonJS, Node 20, linked source maps, minified with names kept (stack traces
// stay readable through the maps); the script exits
// non-zero when any bundle fails; it prints every output's size. Run by `npm run build` and
// by `prepare`, so `npm ci` leaves a working build.
import { build } from 'esbuild';
import { chmodSync, copyFileSync, existsSync, mkdirSync, readdirSync, rmSync, statSync } from 'node:fs';
import { rawTextPlugin } from './esbuild-plugins.mjs';
import { dirname, join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';

const root = resolve(dirname(fileURLToPath(import.meta.url)), '..');
const dist = join(root, 'dist');
const lspMain = join(root, 'server/src/lsp/main.ts');

/**
 * While server/src/lsp/main.ts has not been written, imports of it resolve to a module whose
 * runLanguageServer() stops with a clear message, so the CLI's other commands still build.
 */
const missingLanguageServer = {
  name: 'missing-language-server',
  setup(b) {
    b.onResolve({ filter: /(^|\/)lsp\/main$/ }, (args) => {
      const target = resolve(args.resolveDir, args.path);
      if (target !== lspMain.replace(/\.ts$/, '') || existsSync(lspMain)) return undefined;
      return { path: 'missing-lsp-main', namespace: 'saltus-missing' };
    });
    b.onLoad({ filter: /.*/, namespace: 'saltus-missing' }, () => ({
      loader: 'js',
      contents: `export function runLanguageServer() {
        process.stderr.write('saltus: this build has no language server (server/src/lsp/main.ts was missing when dist/ was built); rebuild with npm run build\\n');
        process.exit(2);
      }`,
    }));
  },
};

/**
 * KaTeX leaves dist/cli.js for its own file, dist/katex.js, which the server loads on first
 * use (outputs/preview.ts `loadTypesetter`): a fifth of the bundle the first diagnostics do
 * not need is then neither compiled nor run at start.
 */
const katexApart = {
  name: 'katex-apart',
  setup(b) {
    // a CommonJS stand-in, so the bundle's `import('katex')` becomes a plain require of the
    // file beside it (a real dynamic import would need an ES module loader in every host)
    b.onResolve({ filter: /^katex$/ }, () => ({ path: 'katex', namespace: 'katex-apart' }));
    b.onLoad({ filter: /.*/, namespace: 'katex-apart' }, () => ({ loader: 'js', contents: "module.exports = require('./katex.js');" }));
    b.onResolve({ filter: /^\.\/katex\.js$/, namespace: 'katex-apart' }, () => ({ path: './katex.js', external: true }));
  },
};

const common = {
  bundle: true,
  platform: 'node',
  target: 'node20',
  format: 'cjs',
  sourcemap: 'linked',
  minify: true,
  keepNames: true,
  logLevel: 'warning',
  absWorkingDir: root,
  plugins: [missingLanguageServer, rawTextPlugin],
};

const bundles = [
  { entryPoints: ['client/src/extension.ts'], outfile: 'dist/client.js', external: ['vscode'] },
  { entryPoints: ['server/src/cli/main.ts'], outfile: 'dist/cli.js', banner: { js: '#!/usr/bin/env node' }, plugins: [...common.plugins, katexApart] },
  { entryPoints: ['katex'], outfile: 'dist/katex.js', sourcemap: false },
  // only Node built-ins: it loads dist/cli.js at run time, through the V8 code cache
  { entryPoints: ['server/src/boot/serverEntry.ts'], outfile: 'dist/server.js', sourcemap: false },
];

function copyKatex() {
  const from = join(root, 'node_modules/katex/dist');
  const to = join(dist, 'katex');
  if (!existsSync(from)) {
    console.warn('build: node_modules/katex is missing; dist/katex/ not written');
    return [];
  }
  rmSync(to, { recursive: true, force: true });
  mkdirSync(join(to, 'fonts'), { recursive: true });
  const copied = [];
  copyFileSync(join(from, 'katex.min.css'), join(to, 'katex.min.css'));
  copied.push(join(to, 'katex.min.css'));
  for (const f of readdirSync(join(from, 'fonts'))) {
    if (!f.endsWith('.woff2')) continue;
    copyFileSync(join(from, 'fonts', f), join(to, 'fonts', f));
    copied.push(join(to, 'fonts', f));
  }
  return copied;
}

function kib(bytes) {
  return `${(bytes / 1024).toFixed(1)} KiB`;
}

const started = performance.now();
mkdirSync(dist, { recursive: true });
if (!existsSync(lspMain)) console.warn('build: server/src/lsp/main.ts is missing; `saltus lsp` and dist/server.js will only report that');
try {
  await Promise.all(bundles.map((b) => build({ ...common, ...b })));
} catch {
  // esbuild has already printed the errors with their locations.
  console.error('build: failed');
  process.exit(1);
}
chmodSync(join(dist, 'cli.js'), 0o755);
const katexFiles = copyKatex();
const ms = performance.now() - started;

for (const b of bundles) {
  const file = join(root, b.outfile);
  console.log(`  ${b.outfile.padEnd(18)} ${kib(statSync(file).size).padStart(11)}`);
}
const katexBytes = katexFiles.reduce((n, f) => n + statSync(f).size, 0);
console.log(`  ${(relative(root, join(dist, 'katex')) + '/').padEnd(18)} ${kib(katexBytes).padStart(11)}  (${katexFiles.length} files)`);
console.log(`build: done in ${Math.round(ms)} ms`);
