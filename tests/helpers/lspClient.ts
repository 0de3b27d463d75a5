// The JSON-RPC side of the black-box language-server tests: bundles server/src/lsp/main.ts
// with esbuild, starts it as `node server.js --stdio`, and talks LSP (3.17) to it with a real
// client (vscode-languageserver-protocol over vscode-jsonrpc streams). Client records
// published diagnostics, log and showMessage notifications, and $/progress, and answers the
// server's requests (configuration, registration, progress creation, message requests).
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { build } from 'esbuild';
import { rawTextPlugin } from '../../scripts/esbuild-plugins.mjs';
import {
  createProtocolConnection, StreamMessageReader, StreamMessageWriter, type ProtocolConnection, type PublishDiagnosticsParams,
} from 'vscode-languageserver-protocol/node';
import { LineIndex } from '../../server/src/base/lineIndex';

export const root = join(__dirname, '..', '..');

export class Client {
  readonly diagnostics = new Map<string, PublishDiagnosticsParams[]>();
  readonly logs: string[] = [];
  readonly messages: { type: number; message: string }[] = [];
  readonly messageRequests: { message: string; actions: { title: string }[] }[] = [];
  readonly progress: { token: string | number; value: { kind: string; title?: string; message?: string; percentage?: number; cancellable?: boolean } }[] = [];
  readonly createdProgress: (string | number)[] = [];
  readonly shownDocuments: { uri: string }[] = [];
  readonly notifications: string[] = [];
  /** Chooses the answer to window/showMessageRequest (the title of an action, or null). */
  answer: (req: { message: string; actions: { title: string }[] }) => string | null = () => null;
  private waiters: (() => void)[] = [];
  settings: Record<string, unknown> = { timestep: '', diagnostics: { when: 'typing' } };
  constructor(readonly conn: ProtocolConnection) {
    conn.onNotification('textDocument/publishDiagnostics', (p: PublishDiagnosticsParams) => {
      const list = this.diagnostics.get(p.uri) ?? [];
      list.push(p);
      this.diagnostics.set(p.uri, list);
      this.wake();
    });
    conn.onNotification('window/logMessage', (p: { message: string }) => { this.logs.push(p.message); this.wake(); });
    conn.onNotification('window/showMessage', (p: { type: number; message: string }) => { this.messages.push(p); this.wake(); });
    conn.onNotification('$/progress', (p: Client['progress'][number]) => { this.progress.push(p); this.wake(); });
    // the custom progress notification the server once sent (now the protocol's $/progress)
    conn.onNotification('saltus/crosscheckProgress', () => { this.notifications.push('saltus/crosscheckProgress'); });
    conn.onRequest('workspace/configuration', (p: { items: unknown[] }) => p.items.map(() => this.settings));
    conn.onRequest('client/registerCapability', () => null);
    conn.onRequest('window/workDoneProgress/create', (p: { token: string | number }) => { this.createdProgress.push(p.token); return null; });
    conn.onRequest('window/showMessageRequest', (p: { message: string; actions: { title: string }[] }) => {
      this.messageRequests.push(p);
      const title = this.answer(p);
      this.wake();
      return title === null ? null : p.actions.find((a) => a.title === title) ?? null;
    });
    conn.onRequest('window/showDocument', (p: { uri: string }) => { this.shownDocuments.push(p); this.wake(); return { success: true }; });
    conn.listen();
  }
  private wake(): void { const w = this.waiters; this.waiters = []; for (const f of w) f(); }
  /** Resolves when `cond` holds (checked on each notification), rejects after `ms`. */
  until<T>(cond: () => T | undefined, ms = 10_000, what = 'condition'): Promise<T> {
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`timed out waiting for ${what}`)), ms);
      const check = (): void => {
        const v = cond();
        if (v !== undefined && v !== false) { clearTimeout(timer); resolve(v); } else this.waiters.push(check);
      };
      check();
    });
  }
  diagnosticsFor(uri: string, version: number): Promise<PublishDiagnosticsParams> {
    return this.until(() => this.diagnostics.get(uri)?.find((p) => p.version === version), 10_000, `diagnostics of ${uri} v${version}`);
  }
  open(uri: string, text: string, version = 1): void {
    void this.conn.sendNotification('textDocument/didOpen', { textDocument: { uri, languageId: 'saltus', version, text } });
  }
}

/** 0-based position of the k-th character of the first `needle` in `text`. */
export const pos = (text: string, needle: string, k = 0): { line: number; character: number } => {
  const i = text.indexOf(needle);
  if (i < 0) throw new Error(needle);
  return new LineIndex(text).positionAt(i + k);
};

export interface StdioServer { proc: ChildProcess; client: Client; stderr: () => string; dispose: () => void }

/** Bundles and starts the server over stdio (not yet initialized). */
export async function startStdioServer(): Promise<StdioServer> {
  const dir = mkdtempSync(join(tmpdir(), 'saltus-lsp-test-'));
  const entry = join(dir, 'entry.ts');
  writeFileSync(entry, `import { runLanguageServer } from ${JSON.stringify(join(root, 'server/src/lsp/main'))};\nrunLanguageServer();\n`);
  await build({ entryPoints: [entry], bundle: true, platform: 'node', format: 'cjs', target: 'node20', outfile: join(dir, 'server.js'), logLevel: 'silent', plugins: [rawTextPlugin] });
  const proc = spawn(process.execPath, [join(dir, 'server.js'), '--stdio'], { stdio: ['pipe', 'pipe', 'pipe'] });
  let stderr = '';
  proc.stderr!.on('data', (d) => { stderr += String(d); });
  const client = new Client(createProtocolConnection(new StreamMessageReader(proc.stdout!), new StreamMessageWriter(proc.stdin!)));
  return {
    proc, client, stderr: () => stderr,
    dispose: () => { if (proc.exitCode === null) proc.kill(); rmSync(dir, { recursive: true, force: true }); },
  };
}
