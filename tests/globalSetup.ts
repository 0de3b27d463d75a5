// Builds dist/ once before the suites run when any source is newer than the bundle, so the
// tests that run the real CLI and server (dist/cli.js) never race to rebuild it.
import { execFileSync } from 'node:child_process';
import { readdirSync, statSync } from 'node:fs';
import { join, resolve } from 'node:path';

const root = resolve(__dirname, '..');

function newest(path: string): number {
  const st = statSync(path);
  if (!st.isDirectory()) return st.mtimeMs;
  return Math.max(0, ...readdirSync(path).map((f) => newest(join(path, f))));
}

export default function setup(): void {
  const sources = Math.max(newest(join(root, 'server/src')), newest(join(root, 'client/src')),
    newest(join(root, 'scripts/build.mjs')), newest(join(root, 'package.json')));
  let built = 0;
  try { built = statSync(join(root, 'dist/cli.js')).mtimeMs; } catch { /* not built yet */ }
  if (built < sources) execFileSync(process.execPath, [join(root, 'scripts/build.mjs')], { cwd: root, stdio: 'inherit' });
}
