// `saltus migrate` as users run it (dist/cli.js in a subprocess, rebuilt when older than the
// sources): nothing is written without --write; the diff, --stdout, --write (atomic, keeps the
// byte-order mark and the file mode, refuses nothing it cannot check), and the exit codes.
import { spawnSync } from 'node:child_process';
import { chmodSync, mkdtempSync, readdirSync, readFileSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';

const root = resolve(__dirname, '..');
const cli = join(root, 'dist/cli.js');
let dir = '';

function newestMtime(path: string): number {
  const st = statSync(path);
  if (!st.isDirectory()) return st.mtimeMs;
  return Math.max(0, ...readdirSync(path).map((f) => newestMtime(join(path, f))));
}
const run = (args: string[]) => {
  const r = spawnSync(process.execPath, [cli, ...args], { cwd: dir, encoding: 'utf8', env: { ...process.env, NO_COLOR: '' } });
  return { code: r.status, stdout: r.stdout, stderr: r.stderr };
};

const OLD = `timestep 0.1 [ms]
neuron Pump "bearing channel" {
  param tau = 5 [ms] "decay"
  state V = 0        "potential"
  dV/dt = -V / tau
}
`;
const NEW = `timestep 0.1 [ms]
#~ bearing channel
neuron Pump {
  param tau = 5 [ms] #~ decay
  state V = 0        #~ potential
  dV/dt = -V / tau
}
`;

beforeAll(() => {
  const sources = Math.max(newestMtime(join(root, 'server/src')), newestMtime(join(root, 'scripts/build.mjs')));
  let built = 0;
  try { built = statSync(cli).mtimeMs; } catch { /* not built yet */ }
  if (built < sources) {
    const b = spawnSync(process.execPath, [join(root, 'scripts/build.mjs')], { cwd: root, encoding: 'utf8' });
    if (b.status !== 0) throw new Error(`build failed:\n${b.stdout}\n${b.stderr}`);
  }
  dir = mkdtempSync(join(tmpdir(), 'saltus-migrate-'));
});
afterAll(() => { if (dir) rmSync(dir, { recursive: true, force: true }); });

describe('saltus migrate', () => {
  it('shows a unified diff and writes nothing by default (exit 1: rewrites pending)', () => {
    writeFileSync(join(dir, 'a.saltus'), OLD);
    const r = run(['migrate', 'a.saltus']);
    expect(r.code).toBe(1);
    expect(readFileSync(join(dir, 'a.saltus'), 'utf8')).toBe(OLD);
    expect(r.stdout).toBe([
      '--- a.saltus', '+++ a.saltus (migrated)', '@@ -1,6 +1,7 @@', ' timestep 0.1 [ms]',
      '-neuron Pump "bearing channel" {', '-  param tau = 5 [ms] "decay"', '-  state V = 0        "potential"',
      '+#~ bearing channel', '+neuron Pump {', '+  param tau = 5 [ms] #~ decay', '+  state V = 0        #~ potential',
      '   dV/dt = -V / tau', ' }', ''].join('\n'));
  });

  it('--stdout prints the rewritten text of one file', () => {
    writeFileSync(join(dir, 'a.saltus'), OLD);
    const r = run(['migrate', '--stdout', 'a.saltus']);
    expect(r.code).toBe(0);
    expect(r.stdout).toBe(NEW);
    expect(readFileSync(join(dir, 'a.saltus'), 'utf8')).toBe(OLD);
  });

  it('--write replaces the file atomically, keeping its byte-order mark and mode; a second run has nothing to do', () => {
    const path = join(dir, 'b.saltus');
    writeFileSync(path, Buffer.concat([Buffer.from([0xef, 0xbb, 0xbf]), Buffer.from(OLD)]));
    chmodSync(path, 0o640);
    const r = run(['migrate', '--write', 'b.saltus']);
    expect(r.code).toBe(0);
    expect(r.stderr).toBe('saltus migrate: b.saltus: 3 docstrings rewritten\n');
    const bytes = readFileSync(path);
    expect([...bytes.subarray(0, 3)]).toEqual([0xef, 0xbb, 0xbf]);
    expect(bytes.subarray(3).toString('utf8')).toBe(NEW);
    expect(statSync(path).mode & 0o777).toBe(0o640);
    expect(readdirSync(dir).filter((f) => f.endsWith('.tmp'))).toEqual([]);
    const again = run(['migrate', '--write', 'b.saltus']);
    expect(again.code).toBe(0);
    expect(again.stderr).toBe('saltus migrate: nothing to rewrite\n');
    expect(run(['migrate', 'b.saltus']).code).toBe(0);
  });

  it('usage errors: both modes, --stdout with two files, a missing file (exit 2, nothing written)', () => {
    writeFileSync(join(dir, 'a.saltus'), OLD);
    expect(run(['migrate', '--write', '--stdout', 'a.saltus'])).toMatchObject({ code: 2, stdout: '' });
    expect(run(['migrate', '--stdout', 'a.saltus', 'a.saltus'])).toMatchObject({ code: 2, stdout: '' });
    const missing = run(['migrate', '--write', 'a.saltus', 'nope.saltus']);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toContain('nope.saltus: no such file');
    expect(readFileSync(join(dir, 'a.saltus'), 'utf8')).toBe(OLD);
  });
});
