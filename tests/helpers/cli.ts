// Runs the built command-line tool (dist/cli.js, built by tests/globalSetup.ts) as a child
// process, the way a modeller runs it.
import { spawnSync } from 'node:child_process';
import { join, resolve } from 'node:path';

export const root = resolve(__dirname, '..', '..');
export const cliPath = join(root, 'dist', 'cli.js');

export function runCli(args: string[], cwd = root, input?: string): { code: number | null; stdout: string; stderr: string } {
  const r = spawnSync(process.execPath, [cliPath, ...args], { cwd, encoding: 'utf8', env: { ...process.env, NO_COLOR: '1' }, ...(input !== undefined ? { input } : {}), maxBuffer: 64 << 20 });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
}
