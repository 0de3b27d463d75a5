// The editor conventions of mature language servers, over stdio with the real server
// (helpers/lspClient.ts): documentation links of diagnostics, "fix all", signature help,
// selection ranges, range formatting, workspace symbols from the announced folders only,
// inlay hints in the language's own notation, the protocol's work-done progress for the
// cross-check, and CodeLens commands that the server executes (workspace/executeCommand).
import { CODE_TARGETS } from '../server/src/codegen/targets';
import { existsSync, mkdirSync, mkdtempSync, readdirSync, readFileSync, rmSync, symlinkSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { pathToFileURL } from 'node:url';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { CodeAction, Diagnostic, SignatureHelp, SymbolInformation, TextEdit } from 'vscode-languageserver-protocol';
import { LineIndex } from '../server/src/base/lineIndex';
import { pos, root, startStdioServer, type StdioServer } from './helpers/lspClient';

const MISTAKES = [
  'neuron Cell {',
  '  param tau_m = 20 [ms]',
  '  param tau_s = 5 [ms]',
  '  param unused = 3',
  '  state V = 0',
  '  state I = 0',
  '  dV/dt = (I - V) / tau_m',
  '  dI/dt = -I / tau_sx',
  '  fire when V crosses 1 up { v := 0 }',
  '  incoming w { I := I + w }',
  '}',
  '',
].join('\n');

/** Applies LSP text edits (non-overlapping) to a text. */
function apply(text: string, edits: TextEdit[]): string {
  const lines = new LineIndex(text);
  const at = edits.map((e) => ({ start: lines.offsetAt(e.range.start), end: lines.offsetAt(e.range.end), text: e.newText })).sort((x, y) => y.start - x.start);
  let out = text;
  for (const e of at) out = out.slice(0, e.start) + e.text + out.slice(e.end);
  return out;
}

describe('editor conventions over stdio', () => {
  let server: StdioServer;
  let ws = '', outside = '';
  let caps: Record<string, unknown> = {};

  beforeAll(async () => {
    // a workspace folder with .saltus files, some of which must not be read
    ws = mkdtempSync(join(tmpdir(), 'saltus-ws-'));
    outside = mkdtempSync(join(tmpdir(), 'saltus-outside-'));
    writeFileSync(join(ws, 'alpha.saltus'), 'neuron Alpha {\n  state V = 0\n}\n');
    mkdirSync(join(ws, 'models', 'deep'), { recursive: true });
    writeFileSync(join(ws, 'models', 'deep', 'beta.saltus'), '# two neurons\nneuron BetaCell {\n}\n\nneuron GammaCell {\n}\n');
    mkdirSync(join(ws, 'node_modules', 'pkg'), { recursive: true });
    writeFileSync(join(ws, 'node_modules', 'pkg', 'dep.saltus'), 'neuron InDependency {\n}\n');
    mkdirSync(join(ws, '.cache'));
    writeFileSync(join(ws, '.cache', 'hidden.saltus'), 'neuron InDotFolder {\n}\n');
    writeFileSync(join(ws, 'huge.saltus'), `neuron TooLarge {\n}\n${'# padding\n'.repeat(120_000)}`);
    writeFileSync(join(ws, 'notes.txt'), 'neuron NotSaltus {\n}\n');
    writeFileSync(join(outside, 'far.saltus'), 'neuron OutsideTheFolder {\n}\n');
    symlinkSync(outside, join(ws, 'link-out'), 'dir');
    symlinkSync(join(outside, 'far.saltus'), join(ws, 'far-link.saltus'));

    server = await startStdioServer();
    const init = await server.client.conn.sendRequest('initialize', {
      processId: process.pid, rootUri: pathToFileURL(outside).href, // workspaceFolders wins over rootUri
      workspaceFolders: [{ uri: pathToFileURL(ws).href, name: 'ws' }],
      capabilities: {
        window: { workDoneProgress: true, showDocument: { support: true } },
        workspace: { workspaceFolders: true },
        textDocument: { publishDiagnostics: { versionSupport: true }, signatureHelp: { signatureInformation: { parameterInformation: { labelOffsetSupport: true } } } },
      },
    }) as { capabilities: Record<string, unknown> };
    caps = init.capabilities;
    await server.client.conn.sendNotification('initialized', {});
  }, 60_000);

  afterAll(() => {
    server?.dispose();
    rmSync(ws, { recursive: true, force: true });
    rmSync(outside, { recursive: true, force: true });
  });

  it('announces each feature in its initialize reply', () => {
    expect(caps).toMatchObject({
      signatureHelpProvider: { triggerCharacters: ['(', ','] },
      selectionRangeProvider: true,
      documentRangeFormattingProvider: true,
      workspaceSymbolProvider: true,
      codeActionProvider: { codeActionKinds: ['quickfix', 'source.fixAll.saltus'] },
      executeCommandProvider: { commands: ['saltus.server.showAdjoint', 'saltus.server.generateCode'] },
    });
  });

  it('links every diagnostic to its code\'s row in docs/language.md', async () => {
    const { client } = server;
    const uri = 'file:///inline/links.saltus';
    client.open(uri, MISTAKES);
    const d = await client.diagnosticsFor(uri, 1);
    const doc = readFileSync(join(root, 'docs/language.md'), 'utf8');
    expect(d.diagnostics.length).toBeGreaterThan(2);
    for (const x of d.diagnostics as Diagnostic[]) {
      const href = x.codeDescription?.href ?? '';
      expect(href).toMatch(new RegExp(`/docs/language\\.md#code-${String(x.code)}$`));
      expect(doc).toContain(`id="code-${String(x.code)}"`);
    }
  });

  it('answers source.fixAll.saltus with the unambiguous fixes, and quick fixes only when asked for them', async () => {
    const { client } = server;
    const uri = 'file:///inline/fixall.saltus';
    client.open(uri, MISTAKES);
    await client.diagnosticsFor(uri, 1);
    const whole = { start: { line: 0, character: 0 }, end: { line: 11, character: 0 } };
    const onSave = await client.conn.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: whole, context: { diagnostics: [], only: ['source.fixAll'] } }) as CodeAction[];
    expect(onSave.map((x) => x.kind)).toEqual(['source.fixAll.saltus']);
    const fixed = apply(MISTAKES, onSave[0]!.edit!.changes![uri]!);
    expect(fixed).toContain('dI/dt = -I / tau_s\n');
    expect(fixed).toContain('{ V := 0 }');
    expect(fixed).toContain('param unused = 3'); // a hint's fix is not applied
    void client.conn.sendNotification('textDocument/didChange', { textDocument: { uri, version: 2 }, contentChanges: [{ text: fixed }] });
    const after = await client.diagnosticsFor(uri, 2);
    expect(after.diagnostics.filter((x) => x.severity === 1)).toEqual([]);
    // the light bulb (no `only`) gets quick fixes, never the source action
    const bulb = await client.conn.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: whole, context: { diagnostics: [] } }) as CodeAction[];
    expect(bulb.every((x) => x.kind === 'quickfix')).toBe(true);
    const none = await client.conn.sendRequest('textDocument/codeAction', { textDocument: { uri }, range: whole, context: { diagnostics: [], only: ['source.fixAll'] } }) as CodeAction[];
    expect(none).toEqual([]); // nothing left to fix without a choice
  });

  it('gives signature help for max with offsets into the label', async () => {
    const { client } = server;
    const uri = 'file:///inline/sig.saltus';
    const text = 'neuron N {\n  param E = 1\n  state V = 0\n  dV/dt = max(E, V) / (1 [ms])\n}\n';
    client.open(uri, text);
    await client.diagnosticsFor(uri, 1);
    const h = await client.conn.sendRequest('textDocument/signatureHelp', { textDocument: { uri }, position: pos(text, ', V)', 2) }) as SignatureHelp;
    expect(h.activeParameter).toBe(1);
    const s = h.signatures[0]!;
    expect(s.label).toBe('max(x1, x2, …)');
    expect(s.parameters![1]!.label).toEqual([8, 10]);
    expect(await client.conn.sendRequest('textDocument/signatureHelp', { textDocument: { uri }, position: pos(text, '/ (1', 0) })).toBeNull();
  });

  it('grows the selection from a name to its equation, and formats only the selected lines', async () => {
    const { client } = server;
    const uri = 'file:///inline/select.saltus';
    const text = 'neuron N {\n  param tau=5 [ms]\n    state V = 0\n  dV/dt=-V/tau\n}\n';
    client.open(uri, text);
    await client.diagnosticsFor(uri, 1);
    const [sel] = await client.conn.sendRequest('textDocument/selectionRange', { textDocument: { uri }, positions: [pos(text, 'V/tau', 0)] }) as { range: { start: unknown; end: unknown }; parent?: unknown }[];
    const lines = new LineIndex(text);
    const chain: string[] = [];
    for (let r = sel as { range: { start: { line: number; character: number }; end: { line: number; character: number } }; parent?: unknown } | undefined; r; r = r.parent as typeof r) {
      chain.push(text.slice(lines.offsetAt(r.range.start), lines.offsetAt(r.range.end)));
    }
    expect(chain.slice(0, 4)).toEqual(['V', '-V', '-V/tau', 'dV/dt=-V/tau']);
    expect(chain.at(-1)).toBe(text);
    const line = pos(text, 'state V').line;
    const edits = await client.conn.sendRequest('textDocument/rangeFormatting', {
      textDocument: { uri }, range: { start: { line, character: 0 }, end: { line, character: 3 } }, options: { tabSize: 2, insertSpaces: true },
    }) as TextEdit[];
    expect(apply(text, edits)).toBe('neuron N {\n  param tau=5 [ms]\n  state V = 0\n  dV/dt=-V/tau\n}\n');
  });

  it('shows the unit hint in brackets, never as ": unit"', async () => {
    const { client } = server;
    const uri = 'file:///inline/hints.saltus';
    const text = 'neuron N {\n  param a = 2\n  let b = a * a\n  state V [mV] = 0\n  dV/dt = -V / (1 [ms])\n}\n';
    client.open(uri, text);
    await client.diagnosticsFor(uri, 1);
    const hints = await client.conn.sendRequest('textDocument/inlayHint', { textDocument: { uri }, range: { start: { line: 0, character: 0 }, end: { line: 6, character: 0 } } }) as { label: string }[];
    expect(hints.map((h) => h.label)).toEqual(['⇒ [1]', '⇒ [mV/ms]']);
  });

  it('finds neurons across open documents and the workspace folder, and reads nothing outside it', async () => {
    const { client } = server;
    // alpha.saltus is open with unsaved changes: its open text wins over the disk
    const alpha = pathToFileURL(join(ws, 'alpha.saltus')).href;
    client.open(alpha, 'neuron AlphaEdited {\n  state V = 0\n}\n');
    await client.diagnosticsFor(alpha, 1);
    const all = await client.conn.sendRequest('workspace/symbol', { query: '' }) as SymbolInformation[];
    const names = all.map((s) => s.name);
    for (const want of ['AlphaEdited', 'BetaCell', 'GammaCell']) expect(names).toContain(want);
    for (const never of ['Alpha', 'InDependency', 'InDotFolder', 'TooLarge', 'NotSaltus', 'OutsideTheFolder']) expect(names).not.toContain(never);
    const beta = all.find((s) => s.name === 'BetaCell')!;
    expect(beta.location.uri).toBe(pathToFileURL(join(ws, 'models', 'deep', 'beta.saltus')).href);
    expect(beta.location.range.start).toEqual({ line: 1, character: 0 });
    expect(beta.containerName).toBe('beta.saltus');
    const q = await client.conn.sendRequest('workspace/symbol', { query: 'gc' }) as SymbolInformation[];
    expect(q.map((s) => s.name)).toEqual(['GammaCell']);
    // a folder added later is searched; a removed one is not
    void client.conn.sendNotification('workspace/didChangeWorkspaceFolders', { event: { added: [{ uri: pathToFileURL(outside).href, name: 'out' }], removed: [{ uri: pathToFileURL(ws).href, name: 'ws' }] } });
    await new Promise((r) => setTimeout(r, 100));
    const now = (await client.conn.sendRequest('workspace/symbol', { query: '' }) as SymbolInformation[]).map((s) => s.name);
    expect(now).toContain('OutsideTheFolder');
    expect(now).not.toContain('BetaCell');
    expect(now).toContain('AlphaEdited'); // open documents always count
  });

  it('reports the cross-check on the protocol\'s work-done progress (client token, else one it creates), never a custom notification', async () => {
    const { client } = server;
    const uri = pathToFileURL(join(root, 'samples', 'lif_current.saltus')).href;
    client.open(uri, readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8'));
    await client.diagnosticsFor(uri, 1);
    const scenario = JSON.parse(readFileSync(join(root, 'samples', 'scenarios', 'lif_current.json'), 'utf8'));
    const r = await client.conn.sendRequest('saltus/crosscheck', { uri, scenario, scenarioLabel: 'lif_current.json', workDoneToken: 'mine-1' }) as { passed: boolean };
    expect(r.passed).toBe(true);
    const mine = client.progress.filter((p) => p.token === 'mine-1').map((p) => p.value);
    expect(mine[0]).toMatchObject({ kind: 'begin', cancellable: true });
    expect(mine[0]!.title).toMatch(/lif_current\.json/);
    expect(mine.filter((v) => v.kind === 'report').length).toBeGreaterThan(3);
    expect(mine.filter((v) => v.kind === 'report').every((v) => /^\d+\/\d+ simulations/.test(v.message ?? '') && v.percentage! >= 0 && v.percentage! <= 100)).toBe(true);
    expect(mine.at(-1)).toEqual({ kind: 'end' });
    // without a token: the server creates one (window/workDoneProgress/create)
    const before = client.createdProgress.length;
    await client.conn.sendRequest('saltus/crosscheck', { uri, scenario });
    expect(client.createdProgress.length).toBe(before + 1);
    const created = client.createdProgress.at(-1)!;
    expect(client.progress.filter((p) => p.token === created).map((p) => p.value.kind)).toEqual(expect.arrayContaining(['begin', 'report', 'end']));
    expect(client.notifications).not.toContain('saltus/crosscheckProgress');
  });

  it('runs the CodeLens commands itself: the adjoint as a message, code generation with a question and a default folder', async () => {
    const { client } = server;
    const file = join(ws, 'models', 'lens.saltus');
    writeFileSync(file, readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8'));
    const uri = pathToFileURL(file).href;
    client.open(uri, readFileSync(file, 'utf8'));
    await client.diagnosticsFor(uri, 1);
    // the folder `generated` goes into the workspace folder holding the model (ws was removed above: add it back)
    void client.conn.sendNotification('workspace/didChangeWorkspaceFolders', { event: { added: [{ uri: pathToFileURL(ws).href, name: 'ws' }], removed: [] } });
    await new Promise((r) => setTimeout(r, 100));
    const lenses = await client.conn.sendRequest('textDocument/codeLens', { textDocument: { uri } }) as { command: { title: string; command: string; arguments: unknown[] } }[];
    const adjointLens = lenses.find((l) => l.command.command === 'saltus.server.showAdjoint')!;
    const generateLens = lenses.find((l) => l.command.title === 'generate code…')!;
    expect(generateLens.command.command).toBe('saltus.server.generateCode');

    const shown = await client.conn.sendRequest('workspace/executeCommand', adjointLens.command) as { title: string; text: string };
    expect(shown.text).toMatch(/dlambda_V\/dt/);
    expect(client.messages.some((m) => m.message === shown.text)).toBe(true);

    client.answer = (req) => (/which language/.test(req.message) ? 'NumPy' : null);
    const reply = await client.conn.sendRequest('workspace/executeCommand', generateLens.command) as { dir: string; written: string[]; errors: string[] };
    expect(client.messageRequests.at(-1)!.actions.map((a) => a.title)).toEqual(CODE_TARGETS.map((t) => t.label));
    expect(reply.errors).toEqual([]);
    const dir = join(ws, 'generated');
    expect(readdirSync(dir).filter((f) => f.endsWith('.py')).length).toBe(3); // the model's module, the dialect and the grid runtime
    expect(client.messages.some((m) => m.message.startsWith(`Saltus wrote 3 file(s) to ${reply.dir}`))).toBe(true);
    expect(client.shownDocuments.at(-1)!.uri).toMatch(/\/generated\/.+\.py$/);

    // an edited file is kept unless the modeller says to overwrite it
    const py = join(dir, readdirSync(dir).find((f) => f.endsWith('.py'))!);
    writeFileSync(py, `${readFileSync(py, 'utf8')}\n# my edit\n`);
    client.answer = (req) => (/which language/.test(req.message) ? 'NumPy' : 'Keep them');
    await client.conn.sendRequest('workspace/executeCommand', generateLens.command);
    expect(readFileSync(py, 'utf8')).toContain('# my edit');
    client.answer = (req) => (/which language/.test(req.message) ? 'NumPy' : 'Overwrite them');
    await client.conn.sendRequest('workspace/executeCommand', generateLens.command);
    expect(readFileSync(py, 'utf8')).not.toContain('# my edit');
    // dismissing the question writes nothing
    rmSync(dir, { recursive: true, force: true });
    client.answer = () => null;
    expect(await client.conn.sendRequest('workspace/executeCommand', generateLens.command)).toBeNull();
    expect(existsSync(dir)).toBe(false);
  });
});

describe('CodeLens commands of a client that runs its own', () => {
  it('name the client\'s commands when it announces them in initializationOptions.clientCommands', async () => {
    const server = await startStdioServer();
    try {
      const { client } = server;
      await client.conn.sendRequest('initialize', { processId: process.pid, rootUri: null, capabilities: {},
        initializationOptions: { clientCommands: ['saltus.showAdjoint', 'saltus.generateCode'] } });
      await client.conn.sendNotification('initialized', {});
      const uri = 'file:///inline/client-lens.saltus';
      client.open(uri, readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8'));
      await client.diagnosticsFor(uri, 1);
      const lenses = await client.conn.sendRequest('textDocument/codeLens', { textDocument: { uri } }) as { command: { command: string } }[];
      expect([...new Set(lenses.map((l) => l.command.command))].sort()).toEqual(['saltus.generateCode', 'saltus.showAdjoint']);
    } finally {
      server.dispose();
    }
  }, 60_000);
});
