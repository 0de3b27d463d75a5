// The language server's V8 code cache (server/src/boot/serverEntry.ts, built into dist/server.js):
// the real built server started over stdio with a real JSON-RPC connection, its cache in a
// temporary directory. Checked: the first start writes one `cli-<key>.v8cache`, the next start
// uses it and publishes the same diagnostics, a damaged cache file is rejected (same
// diagnostics) and replaced, SALTUS_CODE_CACHE=off writes nothing, and the directory keeps only
// the newest few of its own files, never touching others.
import { spawn } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, readdirSync, rmSync, statSync, utimesSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createProtocolConnection, StreamMessageReader, StreamMessageWriter } from 'vscode-languageserver-protocol/node';

const root = join(__dirname, '..');
const server = join(root, 'dist', 'server.js');
const text = readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8').replace('tau_m', 'tau_mm');
let dir: string;

interface Start { diagnostics: unknown[]; log: string }
async function start(env: Record<string, string>): Promise<Start> {
  const proc = spawn(process.execPath, [server, '--stdio'], { stdio: ['pipe', 'pipe', 'pipe'], env: { ...process.env, SALTUS_CODE_CACHE_LOG: '1', ...env } });
  let log = '';
  proc.stderr.on('data', (d: Buffer) => { log += d.toString(); });
  const conn = createProtocolConnection(new StreamMessageReader(proc.stdout), new StreamMessageWriter(proc.stdin));
  const first = new Promise<unknown[]>((res) => conn.onNotification('textDocument/publishDiagnostics', (p: { diagnostics: unknown[] }) => res(p.diagnostics)));
  conn.onRequest('workspace/configuration', (p: { items: unknown[] }) => p.items.map(() => ({})));
  conn.listen();
  await conn.sendRequest('initialize', { processId: process.pid, rootUri: null, capabilities: {} });
  await conn.sendNotification('initialized', {});
  await conn.sendNotification('textDocument/didOpen', { textDocument: { uri: 'file:///cache/lif.saltus', languageId: 'saltus', version: 1, text } });
  const diagnostics = await first;
  await conn.sendRequest('shutdown');
  await conn.sendNotification('exit');
  await new Promise((r) => proc.on('exit', r));
  conn.dispose();
  return { diagnostics, log };
}
const cacheFiles = (d: string): string[] => (existsSync(d) ? readdirSync(d).filter((f) => f.endsWith('.v8cache')) : []);

beforeAll(() => {
  if (!existsSync(server)) throw new Error('dist/server.js is missing: npm run build');
  dir = mkdtempSync(join(tmpdir(), 'saltus-code-cache-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('the language server code cache', () => {
  it('is written by the first start and used by the next, with the same diagnostics', async () => {
    const cache = join(dir, 'a');
    const one = await start({ SALTUS_CODE_CACHE_DIR: cache });
    expect(one.log).toContain('code cache none yet');
    expect(one.diagnostics.length).toBeGreaterThan(0); // the renamed tau_m is reported
    const files = cacheFiles(cache);
    expect(files).toHaveLength(1);
    expect(files[0]).toMatch(/^cli-[0-9a-f]{24}\.v8cache$/);
    expect(statSync(join(cache, files[0])).size).toBeGreaterThan(100_000);
    const two = await start({ SALTUS_CODE_CACHE_DIR: cache });
    expect(two.log).toContain('code cache used');
    expect(two.diagnostics).toEqual(one.diagnostics);
  }, 60_000);

  it('rejects a damaged cache file, still serves, and writes a good one over it', async () => {
    const cache = join(dir, 'a');
    const [file] = cacheFiles(cache);
    const good = readFileSync(join(cache, file));
    const damaged = Buffer.from(good);
    for (let i = 0; i < 64; i++) damaged[i] ^= 0x5a;
    writeFileSync(join(cache, file), damaged);
    const three = await start({ SALTUS_CODE_CACHE_DIR: cache });
    expect(three.log).toContain('code cache rejected');
    expect(three.diagnostics.length).toBeGreaterThan(0);
    const four = await start({ SALTUS_CODE_CACHE_DIR: cache });
    expect(four.log).toContain('code cache used');
    expect(four.diagnostics).toEqual(three.diagnostics);
  }, 60_000);

  it('writes nothing when turned off', async () => {
    const cache = join(dir, 'off');
    const r = await start({ SALTUS_CODE_CACHE_DIR: cache, SALTUS_CODE_CACHE: 'off' });
    expect(r.log).toContain('code cache off');
    expect(r.diagnostics.length).toBeGreaterThan(0);
    expect(existsSync(cache)).toBe(false);
  }, 60_000);

  it('keeps the newest few of its own files and leaves other files alone', async () => {
    const cache = join(dir, 'prune');
    await start({ SALTUS_CODE_CACHE_DIR: cache });
    const old = Date.now() / 1000 - 3600;
    for (let k = 0; k < 6; k++) {
      const f = join(cache, `cli-${String(k).repeat(24)}.v8cache`);
      writeFileSync(f, 'stale');
      utimesSync(f, old + k, old + k);
    }
    writeFileSync(join(cache, 'notes.txt'), 'mine');
    const [current] = cacheFiles(cache).filter((f) => statSync(join(cache, f)).size > 100);
    rmSync(join(cache, current)); // the next start writes it again, and prunes
    await start({ SALTUS_CODE_CACHE_DIR: cache });
    const left = cacheFiles(cache);
    expect(left).toHaveLength(4);
    expect(left).toContain(current);
    expect(left).toContain(`cli-${'5'.repeat(24)}.v8cache`); // the newest stale ones stay
    expect(left).not.toContain(`cli-${'0'.repeat(24)}.v8cache`);
    expect(readFileSync(join(cache, 'notes.txt'), 'utf8')).toBe('mine');
  }, 60_000);
});
