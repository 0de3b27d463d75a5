// End-to-end checks of `node dist/cli.js lsp --stdio` driven by Neovim 0.7.2's built-in
// LSP client (Debian package neovim): tests/e2e/neovim/probe.lua does what a user's
// editor does and records what the client received; this file judges that record.
// Oracles, independent of the client under test: the packaged CLI's JSON diagnostics
// (same analysis, other path: ranges and messages must agree exactly; `saltus adjoint` for
// the adjoint the CodeLens shows), the sample's own text (which names it declares, where
// `tau_m` is, which line the edit fixes), and the files in the workspace folder (the
// neurons workspace symbols must list, what code generation wrote).
// Invariants: nvim runs with --clean -u NONE, XDG folders in a scratch directory, stdin
// from /dev/null and a hard time limit; one run of the probe serves all checks.
import { spawnSync } from 'node:child_process';
import { cpSync, existsSync, mkdirSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { runCommand } from '../../scripts/e2e/tools.mjs';

const ROOT = resolve(dirname(fileURLToPath(import.meta.url)), '../..');
const PROBE = join(ROOT, 'tests/e2e/neovim/probe.lua');

function expect(cond, msg) { if (!cond) throw new Error(msg); }

/** 0-based { line, character } of `needle` on the first line containing `lineNeedle`. */
function positionOf(text, lineNeedle, needle) {
  const lines = text.split('\n');
  const line = lines.findIndex((l) => l.includes(lineNeedle));
  if (line < 0) throw new Error(`the sample no longer contains "${lineNeedle}"`);
  return { line, character: lines[line].indexOf(needle) };
}

function cliDiagnostics(file) {
  const r = spawnSync(process.execPath, [join(ROOT, 'dist/cli.js'), 'check', file, '--format', 'json'], { encoding: 'utf8', timeout: 60_000 });
  if (!r.stdout) throw new Error(`node dist/cli.js check ${file} --format json gave no output (exit ${r.status}): ${r.stderr}`);
  return JSON.parse(r.stdout).files.flatMap((f) => f.diagnostics);
}

const key = (d) => `${d.range.start.line}:${d.range.start.character}-${d.range.end.line}:${d.range.end.character} ${d.message}`;

/** Runs the probe once and returns the checks' results. */
export async function runNeovimChecks({ scratch }) {
  rmSync(scratch, { recursive: true, force: true });
  const ws = join(scratch, 'workspace');
  mkdirSync(ws, { recursive: true });
  cpSync(join(ROOT, 'samples'), ws, { recursive: true });
  for (const d of ['config', 'data', 'state', 'cache']) mkdirSync(join(scratch, `xdg-${d}`), { recursive: true });
  const mistakes = join(ws, 'mistakes.saltus'), clean = join(ws, 'lif_current.saltus');
  const mistakesText = readFileSync(mistakes, 'utf8'), cleanText = readFileSync(clean, 'utf8');
  const typo = positionOf(mistakesText, 'dI/dt = -I / tau_sn', 'dI/dt');
  const firstNeuron = /^neuron\s+(\w+)/m.exec(cleanText)?.[1];
  const lensLine = positionOf(cleanText, `neuron ${firstNeuron}`, firstNeuron).line;
  const input = {
    cmd: [process.execPath, join(ROOT, 'dist/cli.js'), 'lsp', '--stdio'],
    root: ws,
    mistakes: { path: mistakes },
    clean: { path: clean },
    hover: positionOf(cleanText, 'dV/dt = (I - V) / tau_m', 'tau_m'),
    completion: positionOf(cleanText, 'dV/dt = (I - V) / tau_m', 'tau_m'),
    edit: { line: typo.line, text: mistakesText.split('\n')[typo.line].replace('tau_sn', 'tau_s') },
    lens_run: { line: lensLine, target: 'NumPy', generated: join(ws, 'generated'),
      adjoint_command: 'saltus.server.showAdjoint', generate_command: 'saltus.server.generateCode' },
  };
  const inFile = join(scratch, 'probe-in.json'), outFile = join(scratch, 'probe-out.json');
  writeFileSync(inFile, JSON.stringify(input));
  const env = {
    ...process.env, SALTUS_PROBE_IN: inFile, SALTUS_PROBE_OUT: outFile,
    XDG_CONFIG_HOME: join(scratch, 'xdg-config'), XDG_DATA_HOME: join(scratch, 'xdg-data'),
    XDG_STATE_HOME: join(scratch, 'xdg-state'), XDG_CACHE_HOME: join(scratch, 'xdg-cache'),
  };
  const version = (await runCommand('nvim', ['--version'], { timeoutMs: 20_000 })).out.split('\n')[0];
  const started = performance.now();
  const run = await runCommand('nvim', ['--headless', '--clean', '-u', 'NONE', '-i', 'NONE', '-c', `luafile ${PROBE}`, '-c', 'cquit 2'],
    { env, cwd: ws, timeoutMs: 90_000, input: '' });
  const wallMs = Math.round(performance.now() - started);
  const rec = existsSync(outFile) ? JSON.parse(readFileSync(outFile, 'utf8')) : null;
  const lspLog = rec?.lsp_log && existsSync(rec.lsp_log) ? readFileSync(rec.lsp_log, 'utf8').slice(-3000) : '';
  const context = `nvim exit ${run.code} after ${wallMs} ms; output: ${run.out.slice(-1500) || '(none)'}${lspLog ? `\n--- nvim lsp.log ---\n${lspLog}` : ''}`;
  if (!rec || rec.error) {
    return [{ name: 'neovim: probe ran', status: 'fail', detail: `${rec?.error ?? 'no record written'}\n${context}`, ms: wallMs }];
  }
  const expected = cliDiagnostics(mistakes);
  const checks = [
    ['neovim: diagnostics arrive with the CLI\'s ranges and messages', () => {
      expect(rec.filetype === 'saltus', `the buffer's filetype is "${rec.filetype}"`);
      expect(rec.diagnostics_arrived, 'no diagnostics within 20 s');
      const first = rec.published.find((p) => p.uri.endsWith('/mistakes.saltus') && p.diagnostics.length > 0);
      expect(first, 'no publishDiagnostics for mistakes.saltus');
      const got = first.diagnostics.map(key).sort(), want = expected.map(key).sort();
      expect(JSON.stringify(got) === JSON.stringify(want), `the server sent:\n  ${got.join('\n  ')}\nthe CLI reports:\n  ${want.join('\n  ')}`);
      const errors = rec.nvim_diagnostics.filter((d) => d.severity === 1);
      expect(errors.length === expected.filter((d) => d.severity === 'error').length, `vim.diagnostic holds ${errors.length} errors`);
      const flow = positionOf(mistakesText, 'dV/dt = I - V', 'I - V');
      expect(errors.some((d) => d.lnum === flow.line && d.col === flow.character && d.end_col === flow.character + 'I - V'.length && /tau_m/.test(d.message)),
        `no error spanning "I - V" at ${flow.line}:${flow.character} in vim.diagnostic: ${JSON.stringify(errors)}`);
      return `${got.length} diagnostics identical to the CLI's (${errors.length} errors) after ${rec.steps.find((s) => s.name === 'diagnostics').at_ms} ms; flow error on "I - V" at ${flow.line + 1}:${flow.character + 1}`;
    }],
    ['neovim: hover on a parameter shows its unit and docstring', () => {
      expect(rec.capabilities.hover, 'the server does not announce hoverProvider');
      const h = rec.hover;
      expect(h && !h.err && h.result, `no hover result: ${JSON.stringify(h)}`);
      const c = h.result.contents;
      const text = typeof c === 'string' ? c : Array.isArray(c) ? c.map((x) => x.value ?? x).join('\n') : c.value;
      const decl = /param\s+tau_m\s*=\s*[\d.eE+-]+\s*\[\s*([^\]]+?)\s*\](?:\s+trainable)?\s*#~\s*(.*?)\s*$/m.exec(cleanText);
      expect(decl && text.includes(decl[1]) && text.includes(decl[2]), `the hover does not show [${decl?.[1]}] and "${decl?.[2]}":\n${text}`);
      return `hover (${c.kind ?? 'plain'}) shows ${decl[1]} and "${decl[2]}"`;
    }],
    ['neovim: completion lists the declared names', () => {
      expect(rec.capabilities.completion, 'the server does not announce completionProvider');
      expect(rec.completion_error === null || rec.completion_error === undefined, `completion failed: ${JSON.stringify(rec.completion_error)}`);
      const labels = rec.completion.map((i) => i.label);
      const declared = [...cleanText.matchAll(/^\s*(?:param|state|let)\s+([A-Za-z_]\w*)/gm)].map((m) => m[1]);
      const missing = [...new Set(declared)].filter((n) => !labels.includes(n));
      expect(declared.length > 0 && missing.length === 0, `completion lacks ${missing.join(', ')} (got ${labels.slice(0, 30).join(', ')})`);
      return `${labels.length} items, including every declared name (${[...new Set(declared)].join(', ')})`;
    }],
    ['neovim: CodeLenses run through workspace/executeCommand (the adjoint as a message, code generation after a question)', () => {
      const lr = rec.lens_run;
      expect(JSON.stringify(rec.capabilities.executeCommands) === JSON.stringify([input.lens_run.adjoint_command, input.lens_run.generate_command]),
        `the server announces executeCommandProvider ${JSON.stringify(rec.capabilities.executeCommands)}`);
      expect(rec.lenses_arrived && rec.lenses.length > 0, 'no CodeLenses within 20 s');
      const onLine = rec.lenses.filter((l) => l.line === input.lens_run.line);
      expect(onLine.some((l) => l.command === input.lens_run.adjoint_command) && onLine.some((l) => l.command === input.lens_run.generate_command),
        `the lenses on line ${input.lens_run.line + 1} run ${JSON.stringify(onLine)}`);
      expect(lr.adjoint_shown, `no window/showMessage after running the adjoint lens (Neovim offered ${JSON.stringify(lr.picked_from)})`);
      const adjointText = lr.messages[0];
      const adjointCli = spawnSync(process.execPath, [join(ROOT, 'dist/cli.js'), 'adjoint', clean, '--model', firstNeuron], { encoding: 'utf8', timeout: 60_000 });
      const flowLine = adjointText.split('\n').find((l) => /dlambda_V\/dt/.test(l));
      expect(flowLine && adjointCli.stdout.includes(flowLine.trim()), `the adjoint message's flow line "${flowLine}" is not the CLI's (saltus adjoint):\n${adjointCli.stdout.slice(0, 600)}`);
      expect(lr.asked.length === 1 && ['C99', 'CUDA', 'NumPy'].every((l) => lr.asked[0].actions.includes(l)), `the server asked ${JSON.stringify(lr.asked)}`);
      expect(lr.generated, `no message after the generate lens: ${JSON.stringify(lr.messages)}`);
      const py = lr.files.filter((f) => f.endsWith('.py'));
      // the model's module (lowercase) beside the runtime and its array dialect
      const names = py.map((f) => f.split('/').pop()).sort();
      expect(JSON.stringify(names) === JSON.stringify([`${firstNeuron.toLowerCase()}.py`, 'saltus_dialect.py', 'saltus_grid.py']), `generated/ holds ${JSON.stringify(lr.files)}`);
      const wrote = lr.messages.find((m) => m.startsWith('Saltus wrote'));
      expect(wrote && wrote.includes(input.lens_run.generated), `the report reads ${JSON.stringify(lr.messages.slice(1))}`);
      return `lenses [${onLine.map((l) => l.title).join(' | ')}] on line ${input.lens_run.line + 1}; adjoint shown (${adjointText.split('\n').length} lines, flow line as the CLI's); asked [${lr.asked[0].actions.join(', ')}] -> NumPy; "${wrote}"`;
    }],
    ['neovim: workspace symbols list the neurons of the folder\'s .saltus files', () => {
      expect(rec.capabilities.workspaceSymbol, 'the server does not announce workspaceSymbolProvider');
      const want = readdirSync(ws).filter((f) => f.endsWith('.saltus')).flatMap((f) => [...readFileSync(join(ws, f), 'utf8').matchAll(/^neuron\s+(\w+)/gm)].map((m) => `${m[1]}@${f}`)).sort();
      const got = rec.workspace_symbols.map((s) => `${s.name}@${s.uri.split('/').pop()}`).sort();
      expect(JSON.stringify(got) === JSON.stringify(want), `workspace/symbol gave ${JSON.stringify(got)}; the folder declares ${JSON.stringify(want)}`);
      return `${got.length} neurons from ${new Set(got.map((g) => g.split('@')[1])).size} files (open and not open)`;
    }],
    ['neovim: an edit clears its diagnostic', () => {
      expect(rec.edit.line_now === input.edit.text, `the buffer line is "${rec.edit.line_now}"`);
      expect(rec.edit.cleared, `the diagnostic on line ${input.edit.line + 1} did not go away within 10 s`);
      expect(!rec.after_edit.some((d) => d.lnum === input.edit.line), 'vim.diagnostic still has a problem on the edited line');
      const others = expected.filter((d) => d.severity === 'error' && d.range.start.line !== input.edit.line && !/tau_s/.test(d.message)).length;
      expect(rec.after_edit.filter((d) => d.lnum !== input.edit.line).length >= others, `the other problems vanished too: ${JSON.stringify(rec.after_edit)}`);
      return `tau_sn -> tau_s on line ${input.edit.line + 1}: cleared in ${rec.edit.round_trip_ms.toFixed(1)} ms; ${rec.after_edit.length} diagnostics remain`;
    }],
    ['neovim: shutdown is clean', () => {
      const s = rec.shutdown;
      expect(s.stopped && s.exited, `the server did not exit within 10 s of shutdown/exit: ${JSON.stringify(s)}`);
      expect(s.exited.code === 0 && s.exited.signal === 0, `the server exited with code ${s.exited.code}, signal ${s.exited.signal}`);
      expect(run.code === 0, `nvim itself exited ${run.code}`);
      return `server exited 0 ${s.within_ms.toFixed(0)} ms after stop_client; nvim exited 0 (${version}; whole run ${wallMs} ms)`;
    }],
  ];
  const results = checks.map(([name, fn]) => {
    try {
      return { name, status: 'pass', detail: fn(), ms: 0 };
    } catch (e) {
      return { name, status: 'fail', detail: `${e.message}\n${context}`, ms: 0 };
    }
  });
  results.push(await checkDocumentedSetup({ scratch, env, mistakes }));
  return results;
}

/**
 * The Neovim setup that docs/editors.md (or the README, once merged there) tells users to
 * paste into init.lua, run as their init file: the buffer gets the saltus filetype, one
 * client attaches and its diagnostics arrive.
 */
async function checkDocumentedSetup({ scratch, env, mistakes }) {
  const name = 'neovim: the init.lua setup in docs/editors.md works as written';
  const source = ['docs/editors.md', 'README.md'].map((f) => join(ROOT, f)).find((f) => existsSync(f) && /```lua\n[\s\S]*?saltus[\s\S]*?```/.test(readFileSync(f, 'utf8')));
  if (!source) return { name, status: 'fail', detail: 'neither docs/editors.md nor README.md has a ```lua block for Saltus', ms: 0 };
  const lua = /```lua\n([\s\S]*?saltus[\s\S]*?)```/.exec(readFileSync(source, 'utf8'))[1];
  const cmd = `cmd = { ${JSON.stringify(process.execPath)}, ${JSON.stringify(join(ROOT, 'dist/cli.js'))}, 'lsp', '--stdio' }`;
  if (!lua.includes("cmd = { 'saltus', 'lsp', '--stdio' }")) return { name, status: 'fail', detail: `the snippet in ${source} no longer runs cmd = { 'saltus', 'lsp', '--stdio' }`, ms: 0 };
  const init = join(scratch, 'documented-init.lua'), probe = join(scratch, 'documented-check.lua'), out = join(scratch, 'documented-out.json');
  writeFileSync(init, lua.replace("cmd = { 'saltus', 'lsp', '--stdio' }", cmd));
  writeFileSync(probe, `local ok = vim.wait(20000, function() return #vim.diagnostic.get(0) > 0 end, 10)
vim.fn.writefile({ vim.fn.json_encode({ ok = ok, diagnostics = #vim.diagnostic.get(0), clients = #vim.lsp.get_active_clients(), filetype = vim.bo.filetype }) }, ${JSON.stringify(out)})
for _, c in ipairs(vim.lsp.get_active_clients()) do c.stop() end
vim.wait(5000, function() return #vim.lsp.get_active_clients() == 0 end, 10)
vim.cmd('qall!')
`);
  const started = performance.now();
  const run = await runCommand('nvim', ['--headless', '-u', init, '-i', 'NONE', '-c', `luafile ${probe}`, '-c', 'cquit 2', mistakes], { env, timeoutMs: 60_000, input: '' });
  const ms = Math.round(performance.now() - started);
  const rec = existsSync(out) ? JSON.parse(readFileSync(out, 'utf8')) : null;
  const ok = rec && rec.ok && rec.filetype === 'saltus' && rec.clients === 1 && rec.diagnostics > 0 && run.code === 0;
  return {
    name, ms,
    status: ok ? 'pass' : 'fail',
    detail: ok ? `${source.slice(ROOT.length + 1)}'s snippet: filetype saltus, 1 client, ${rec.diagnostics} diagnostics in ${ms} ms`
      : `record ${JSON.stringify(rec)}, nvim exit ${run.code}: ${run.out.slice(-1500)}`,
  };
}
