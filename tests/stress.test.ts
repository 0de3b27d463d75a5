// Protocol stress over stdio: the language server bundled from server/src/lsp/main.ts (as in
// lsp.test.ts), driven by a real JSON-RPC client (vscode-languageserver-protocol). 1,000 rapid
// didChange events (the final diagnostics must be those of the final text), requests for
// closed and never-opened documents, unknown methods, $/cancelRequest of in-flight requests,
// protocol abuse, a file deleted from disk while open (the server works on the sent text),
// memory after 10,000 edits against memory after 100 (VmRSS of the child from /proc), and
// shutdown in the middle of the derived checks of a 20,000-line file. Zero crashes.
import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, rmSync, unlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { build } from 'esbuild';
import { rawTextPlugin } from '../scripts/esbuild-plugins.mjs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createProtocolConnection, StreamMessageReader, StreamMessageWriter, type ProtocolConnection, type PublishDiagnosticsParams } from 'vscode-languageserver-protocol/node';
import { analyse, derivedDiagnostics } from '../server/src/pipeline';
import { generatedFile } from './regressions/bigFiles';

const root = join(__dirname, '..');
const LIF = `timestep 0.1 [ms]\nneuron Sensor {\n  param tau_m = 20 [ms]\n  param tau_s = 5 [ms]\n  state V = 0\n  state I = 0\n  dV/dt = (I - V) / tau_m\n  dI/dt = -I / tau_s\n  fire when V crosses 1 up { V := 0 }\n  incoming w { I := I + w }\n}\n`;

class Client {
  readonly published: PublishDiagnosticsParams[] = [];
  readonly logs: string[] = [];
  private waiters: (() => void)[] = [];
  constructor(readonly conn: ProtocolConnection) {
    conn.onNotification('textDocument/publishDiagnostics', (p: PublishDiagnosticsParams) => { this.published.push(p); this.wake(); });
    conn.onNotification('window/logMessage', (p: { message: string }) => { this.logs.push(p.message); });
    conn.onRequest('workspace/configuration', (p: { items: unknown[] }) => p.items.map(() => ({ diagnostics: { when: 'typing' } })));
    conn.onRequest('client/registerCapability', () => null);
    conn.listen();
  }
  private wake(): void { const w = this.waiters; this.waiters = []; for (const f of w) f(); }
  until<T>(cond: () => T | undefined, ms: number, what: string): Promise<T> {
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`timed out waiting for ${what}`)), ms);
      const check = (): void => { const v = cond(); if (v !== undefined) { clearTimeout(timer); resolve(v); } else this.waiters.push(check); };
      check();
    });
  }
  last(uri: string): PublishDiagnosticsParams | undefined { for (let i = this.published.length - 1; i >= 0; i--) if (this.published[i]!.uri === uri) return this.published[i]; return undefined; }
  versionSeen(uri: string, version: number, ms = 20_000): Promise<PublishDiagnosticsParams> {
    return this.until(() => this.published.find((p) => p.uri === uri && p.version === version), ms, `diagnostics of ${uri} v${version}`);
  }
  /** Resolves once no diagnostics arrived for `quietMs`. */
  async settle(quietMs = 400): Promise<void> {
    for (;;) { const n = this.published.length; await new Promise((r) => setTimeout(r, quietMs)); if (this.published.length === n) return; }
  }
  open(uri: string, text: string, version = 1): void { void this.conn.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'saltus', version, text } }); }
  change(uri: string, version: number, text: string): void { void this.conn.sendNotification('textDocument/didChange', { textDocument: { uri, version }, contentChanges: [{ text }] }); }
}

let dir = '';
let bundle = '';

async function startServer(memoryProbe = false): Promise<{ proc: ChildProcess; client: Client; stderr: () => string }> {
  const proc = spawn(process.execPath, [...(memoryProbe ? ['--expose-gc'] : []), bundle, '--stdio'],
    { stdio: ['pipe', 'pipe', 'pipe'], ...(memoryProbe ? { env: { ...process.env, SALTUS_MEMORY_PROBE: '1' } } : {}) });
  let err = '';
  proc.stderr!.on('data', (d) => { err += String(d); });
  const client = new Client(createProtocolConnection(new StreamMessageReader(proc.stdout!), new StreamMessageWriter(proc.stdin!)));
  await client.conn.sendRequest('initialize', { processId: process.pid, rootUri: null, workspaceFolders: null,
    capabilities: { workspace: { configuration: true }, textDocument: { publishDiagnostics: { versionSupport: true } } } });
  await client.conn.sendNotification('initialized', {});
  return { proc, client, stderr: () => err };
}

const rssKiB = (pid: number): number => Number(/VmRSS:\s+(\d+)/.exec(readFileSync(`/proc/${pid}/status`, 'utf8'))?.[1] ?? NaN);

beforeAll(async () => {
  dir = mkdtempSync(join(tmpdir(), 'saltus-stress-'));
  const entry = join(dir, 'entry.ts');
  writeFileSync(entry, `import { runLanguageServer } from ${JSON.stringify(join(root, 'server/src/lsp/main'))};\nrunLanguageServer();\n`);
  bundle = join(dir, 'server.js');
  await build({ entryPoints: [entry], bundle: true, platform: 'node', format: 'cjs', target: 'node20', outfile: bundle, logLevel: 'silent', plugins: [rawTextPlugin] });
}, 60_000);
afterAll(() => { rmSync(dir, { recursive: true, force: true }); });

describe('language server under stress', () => {
  let s: Awaited<ReturnType<typeof startServer>>;
  beforeAll(async () => { s = await startServer(); }, 60_000);
  afterAll(() => { if (s.proc.exitCode === null) s.proc.kill(); });

  it('1,000 rapid edits: the final diagnostics are those of the final text', async () => {
    const uri = 'file:///stress/rapid.saltus';
    s.client.open(uri, LIF);
    await s.client.versionSeen(uri, 1);
    let text = LIF;
    for (let v = 2; v <= 1001; v++) {
      // Alternate between breaking and repairing names and units, ending on a broken text.
      text = v % 3 === 0 ? LIF.replace('-I / tau_s', `-I / tau_s${v % 7}`) : v % 3 === 1 ? LIF.replace('= 0\n', `= ${v} [mV]\n`) : LIF.replace('(I - V)', `(I - V + ${v})`);
      s.client.change(uri, v, text);
    }
    const final = await s.client.versionSeen(uri, 1001, 30_000);
    await s.client.settle();
    const expected = [...analyse(text).diagnostics, ...derivedDiagnostics(analyse(text))];
    const got = s.client.last(uri)!;
    expect(got.version).toBe(1001);
    expect(got.diagnostics.map((d) => d.code).sort()).toEqual(expected.map((d) => d.code).sort());
    const analysed = s.client.published.filter((p) => p.uri === uri).length;
    console.log(`1,000 rapid edits: ${analysed - 1} publications for 1,000 versions; final has ${final.diagnostics.length} diagnostics`);
  }, 60_000);

  it('answers null or [] for closed and never-opened documents, for every feature', async () => {
    const closed = 'file:///stress/closed.saltus';
    s.client.open(closed, LIF);
    await s.client.versionSeen(closed, 1);
    void s.client.conn.sendNotification('textDocument/didClose', { textDocument: { uri: closed } });
    await s.client.until(() => (s.client.last(closed)?.diagnostics.length === 0 && s.client.last(closed)?.version === undefined ? true : undefined), 5000, 'cleared');
    for (const uri of [closed, 'file:///never/opened.saltus']) {
      const td = { textDocument: { uri } }, at = { ...td, position: { line: 1, character: 8 } };
      const range = { start: { line: 0, character: 0 }, end: { line: 3, character: 0 } };
      const answers = await Promise.all([
        s.client.conn.sendRequest('textDocument/hover', at), s.client.conn.sendRequest('textDocument/completion', at),
        s.client.conn.sendRequest('textDocument/definition', at), s.client.conn.sendRequest('textDocument/references', { ...at, context: { includeDeclaration: true } }),
        s.client.conn.sendRequest('textDocument/documentHighlight', at), s.client.conn.sendRequest('textDocument/documentSymbol', td),
        s.client.conn.sendRequest('textDocument/semanticTokens/full', td), s.client.conn.sendRequest('textDocument/foldingRange', td),
        s.client.conn.sendRequest('textDocument/formatting', { ...td, options: { tabSize: 2, insertSpaces: true } }),
        s.client.conn.sendRequest('textDocument/codeAction', { ...td, range, context: { diagnostics: [] } }),
        s.client.conn.sendRequest('textDocument/inlayHint', { ...td, range }), s.client.conn.sendRequest('textDocument/codeLens', td),
        s.client.conn.sendRequest('textDocument/prepareRename', at), s.client.conn.sendRequest('textDocument/rename', { ...at, newName: 'X' }),
        s.client.conn.sendRequest('saltus/analysisSummary', { uri }), s.client.conn.sendRequest('saltus/adjointPreview', { uri }),
      ]);
      for (const a of answers) expect(a === null || (Array.isArray(a) && a.length === 0) || (a as { data?: unknown[] }).data?.length === 0).toBe(true);
    }
  });

  it('unknown methods get MethodNotFound, protocol abuse is survived, the server keeps answering', async () => {
    await expect(s.client.conn.sendRequest('saltus/noSuchMethod', {})).rejects.toMatchObject({ code: -32601 });
    await expect(s.client.conn.sendRequest('textDocument/noSuchFeature', { textDocument: { uri: 'file:///x' } })).rejects.toMatchObject({ code: -32601 });
    const uri = 'file:///stress/abuse.saltus';
    void s.client.conn.sendNotification('saltus/noSuchNotification', { x: 1 });
    void s.client.conn.sendNotification('textDocument/didChange', { textDocument: { uri: 'file:///never/opened.saltus', version: 3 }, contentChanges: [{ text: 'x' }] });
    void s.client.conn.sendNotification('textDocument/didClose', { textDocument: { uri: 'file:///never/opened.saltus' } });
    s.client.open(uri, LIF);
    s.client.open(uri, LIF + '# opened twice\n', 2);
    void s.client.conn.sendNotification('textDocument/didChange', { textDocument: { uri, version: 3 }, contentChanges: [{ range: { start: { line: 900, character: 5 }, end: { line: 999, character: 0 } }, text: ' # past the end' }] });
    void s.client.conn.sendNotification('textDocument/didChange', { textDocument: { uri, version: 4 }, contentChanges: [{ range: { start: { line: 2, character: 80 }, end: { line: 1, character: 0 } }, text: '' }] });
    await s.client.versionSeen(uri, 4);
    // A position before the document is clamped to its start (the `timestep` keyword): an answer, not an error.
    const farHover = await s.client.conn.sendRequest('textDocument/hover', { textDocument: { uri }, position: { line: -5, character: 1e9 } }) as { contents: { value: string }; range: unknown };
    expect(farHover.range).toEqual({ start: { line: 0, character: 0 }, end: { line: 0, character: 8 } });
    expect(farHover.contents.value).toMatch(/^\*\*timestep\*\* — /);
    // Whatever text the odd edits left, the server analyses it and answers.
    expect(await s.client.conn.sendRequest('saltus/analysisSummary', { uri })).toMatchObject({ neurons: expect.any(Array) });
    expect(s.proc.exitCode).toBeNull();
  });

  it('$/cancelRequest of in-flight requests: each settles (result or RequestCancelled), nothing breaks', async () => {
    const uri = 'file:///stress/cancel.saltus';
    s.client.open(uri, generatedFile(2000));
    const { CancellationTokenSource } = await import('vscode-languageserver-protocol/node');
    const settled = await Promise.allSettled(Array.from({ length: 60 }, (_, k) => {
      const src = new CancellationTokenSource();
      const method = ['textDocument/hover', 'textDocument/codeLens', 'textDocument/semanticTokens/full', 'saltus/adjointPreview'][k % 4]!;
      const p = s.client.conn.sendRequest(method, { textDocument: { uri }, uri, position: { line: 3 + k, character: 4 } }, src.token);
      src.cancel();
      return p;
    }));
    const cancelled = settled.filter((r) => r.status === 'rejected' && (r.reason as { code?: number }).code === -32800).length;
    expect(cancelled).toBeGreaterThan(0); // queued requests are answered RequestCancelled, not computed (lsp/main.ts)
    const otherErrors = settled.filter((r) => r.status === 'rejected' && (r.reason as { code?: number }).code !== -32800);
    expect(otherErrors).toEqual([]);
    console.log(`60 cancelled requests: ${cancelled} answered RequestCancelled, ${60 - cancelled} answered before the cancellation arrived`);
    expect(await s.client.conn.sendRequest('saltus/analysisSummary', { uri })).not.toBeNull();
  }, 60_000);

  it('a file deleted from disk while open: the server works on the text it was sent', async () => {
    const file = join(dir, 'vanishing.saltus');
    writeFileSync(file, LIF.replace('tau_s\n', 'tau_q\n')); // what the disk says (an error) is not what the editor sent
    const uri = pathToFileURL(file).href;
    s.client.open(uri, LIF);
    unlinkSync(file);
    expect(existsSync(file)).toBe(false);
    expect((await s.client.versionSeen(uri, 1)).diagnostics).toEqual([]);
    s.client.change(uri, 2, LIF.replace('tau_m = 20', 'tau_m = 21'));
    expect((await s.client.versionSeen(uri, 2)).diagnostics).toEqual([]);
    const hover = await s.client.conn.sendRequest('textDocument/hover', { textDocument: { uri }, position: { line: 2, character: 9 } }) as { contents: { value: string } };
    expect(hover.contents.value).toContain('21 [ms]');
    expect(await s.client.conn.sendRequest('saltus/adjointPreview', { uri })).not.toBeNull();
    expect(await s.client.conn.sendRequest('textDocument/formatting', { textDocument: { uri }, options: { tabSize: 2, insertSpaces: true } })).toBeInstanceOf(Array);
    void s.client.conn.sendNotification('textDocument/didSave', { textDocument: { uri } });
    void s.client.conn.sendNotification('textDocument/didClose', { textDocument: { uri } });
    await s.client.settle(200);
    expect(s.proc.exitCode).toBeNull();
  });

  it('left no error on stderr', () => { expect(s.stderr()).toBe(''); });
});

describe('memory over many edits (a fresh server)', () => {
  // Live objects, not RSS: the server's heap after a full collection (node --expose-gc and the
  // test-only request saltus/memoryProbe). RSS holds V8's and malloc's slack, which grew 1.6x
  // over 10,000 edits on this machine even for a build whose heap stays flat.
  it('the heap after 10,000 edits stays within 1.25x (+4 MiB) of the heap after 100', { timeout: 180_000 }, async () => {
    const { proc, client, stderr } = await startServer(true);
    const uri = 'file:///stress/memory.saltus';
    client.open(uri, LIF);
    await client.versionSeen(uri, 1);
    let v = 1;
    const edits = async (n: number): Promise<void> => {
      for (let k = 0; k < n; k++) {
        v++;
        // 100 distinct models in turn: the first 100 edits fill the derivation and step caches with
        // all of them (each below its 256-entry bound), so what grows after that is a leak, not
        // legitimate cache fill (the bounded caches have their own tests).
        client.change(uri, v, LIF.replace('(I - V)', `(I - V + ${(v % 100) / 1000})`));
        if (v % 10 === 0) await client.versionSeen(uri, v);
      }
      await client.versionSeen(uri, v);
      await client.settle(300);
    };
    const heap = async (): Promise<number> => {
      const m = await client.conn.sendRequest('saltus/memoryProbe') as { heapUsed: number; collected: boolean };
      expect(m.collected).toBe(true);
      return m.heapUsed;
    };
    await edits(100);
    const after100 = await heap();
    await edits(4_900);
    const after5000 = await heap();
    await edits(5_000);
    const after10000 = await heap();
    const mib = (x: number): string => (x / 1048576).toFixed(1);
    console.log(`server heap after a full collection: ${mib(after100)} MiB after 100 edits, ${mib(after5000)} after 5,000, ${mib(after10000)} after 10,000; RSS ${(rssKiB(proc.pid!) / 1024).toFixed(1)} MiB`);
    expect(after10000).toBeLessThanOrEqual(1.25 * after100 + 4 * 1048576);
    expect(stderr()).toBe('');
    proc.kill();
  });

  it('the memory probe is off by default (no such request)', async () => {
    const { proc, client } = await startServer();
    await expect(client.conn.sendRequest('saltus/memoryProbe')).rejects.toThrow();
    proc.kill();
  });
});

describe('shutdown during analysis', () => {
  it('exits 0 promptly when shutdown arrives in the middle of the derived checks of a 20,000-line file', async () => {
    const { proc, client, stderr } = await startServer();
    const uri = 'file:///stress/huge.saltus';
    client.open(uri, generatedFile(20_000));
    await client.versionSeen(uri, 1, 60_000); // the fast diagnostics; the derived checks are now running in slices
    const exited = new Promise<number | null>((resolve) => proc.on('exit', (code) => resolve(code)));
    const t0 = performance.now();
    await client.conn.sendRequest('shutdown');
    void client.conn.sendNotification('exit');
    expect(await exited).toBe(0);
    const ms = performance.now() - t0;
    console.log(`shutdown during derived checks: exited after ${ms.toFixed(0)} ms`);
    expect(ms).toBeLessThan(10_000);
    expect(stderr()).toBe('');
  }, 120_000);
});
