// Scenarios as tests in VS Code's test explorer (Testing API): each scenario file
// `scenarios/NAME.json` that has its model `NAME.saltus` in the folder above it is a test
// item; running it runs the gradient cross-check through the language server
// (requestCrossCheck) and marks each gradient row, a child item, passed or failed (adjoint
// against the central finite difference, within the scenario's tolerance). The rows are
// known once a scenario has run; running one row runs its scenario and marks that row.
// Invariants: one cross-check at a time per run, cancellable; a scenario that cannot run
// (unreadable JSON, invalid scenario, model with errors) is marked errored with the reason,
// never passed; items follow scenario and model files as they are created and deleted.
import * as vscode from 'vscode';
import type { LanguageClient } from 'vscode-languageclient/node';
import { rowLabel, type AnyRow, type CrossCheckResult } from '../../server/src/crosscheck/types';
import { requestCrossCheck } from './crosscheckRequest';

export const CONTROLLER_ID = 'saltus.crosschecks';
const SCENARIO_GLOB = '**/scenarios/*.json';
const EXCLUDE = '**/node_modules/**';
const MAX_SCENARIOS = 500;

/** The model a scenario belongs to: scenarios/NAME.json -> ../NAME.saltus. */
export function modelOfScenario(scenario: vscode.Uri): vscode.Uri {
  const base = scenario.path.split('/').pop()!.replace(/\.json$/i, '');
  return vscode.Uri.joinPath(scenario, '..', '..', `${base}.saltus`);
}

const exists = async (u: vscode.Uri): Promise<boolean> => {
  try { return (await vscode.workspace.fs.stat(u)).type === vscode.FileType.File; } catch { return false; }
};

const fmt = (x: number | null): string => (x === null ? 'n/a' : x.toPrecision(6));

function rowMessage(r: AnyRow, tolerance: number): vscode.TestMessage {
  const what = `relative error ${r.relativeError === null ? 'n/a' : r.relativeError.toExponential(2)} (tolerance ${tolerance.toExponential(0)}): ${r.status}${r.note ? `; ${r.note}` : ''}`;
  if (r.finiteDifference === null) return new vscode.TestMessage(`adjoint ${fmt(r.adjoint)}, no usable finite difference; ${what}`);
  const m = vscode.TestMessage.diff(`adjoint ${fmt(r.adjoint)} vs finite difference ${fmt(r.finiteDifference)}; ${what}`, fmt(r.finiteDifference), fmt(r.adjoint));
  return m;
}

export function registerCrossCheckTests(client: LanguageClient): vscode.Disposable[] {
  const controller = vscode.tests.createTestController(CONTROLLER_ID, 'Saltus cross-checks');

  const discover = async (): Promise<void> => {
    const found = await vscode.workspace.findFiles(SCENARIO_GLOB, EXCLUDE, MAX_SCENARIOS);
    const items: vscode.TestItem[] = [];
    for (const uri of found.sort((x, y) => x.path.localeCompare(y.path))) {
      const model = modelOfScenario(uri);
      if (!(await exists(model))) continue;
      const id = uri.toString();
      const item = controller.items.get(id) ?? controller.createTestItem(id, uri.path.split('/').pop()!, uri);
      item.description = `cross-check of ${vscode.workspace.asRelativePath(model)}`;
      items.push(item);
    }
    controller.items.replace(items);
  };

  const runScenario = async (run: vscode.TestRun, item: vscode.TestItem, onlyRows: ReadonlySet<string> | undefined, token: vscode.CancellationToken): Promise<void> => {
    const scenarioUri = item.uri!;
    const model = modelOfScenario(scenarioUri);
    const label = vscode.workspace.asRelativePath(scenarioUri);
    if (!onlyRows) run.started(item);
    let scenario: unknown;
    try {
      scenario = JSON.parse(new TextDecoder().decode(await vscode.workspace.fs.readFile(scenarioUri)));
    } catch (e) {
      run.errored(item, new vscode.TestMessage(`${label} is not readable JSON: ${(e as Error).message}`));
      return;
    }
    // the language server checks open documents: open the model (in the background)
    try { await vscode.workspace.openTextDocument(model); } catch (e) {
      run.errored(item, new vscode.TestMessage(`cannot open ${vscode.workspace.asRelativePath(model)}: ${(e as Error).message}`));
      return;
    }
    let result: CrossCheckResult | null = null;
    try {
      result = await requestCrossCheck(client, { uri: model.toString(), scenario, scenarioLabel: label }, {
        token, onProgress: (p) => { if (p.message) run.appendOutput(`${label}: ${p.message}\r\n`, undefined, item); },
      });
    } catch (e) {
      if (token.isCancellationRequested) { run.skipped(item); return; }
      run.errored(item, new vscode.TestMessage(`the cross-check failed: ${(e as Error).message}`));
      return;
    }
    if (!result) { run.errored(item, new vscode.TestMessage(`the language server does not have ${vscode.workspace.asRelativePath(model)} open`)); return; }
    if (result.status === 'cancelled') { run.skipped(item); return; }
    if (result.status === 'invalid') {
      run.errored(item, result.errors.map((e) => new vscode.TestMessage(e.message)));
      return;
    }
    const rows: AnyRow[] = [...result.gradients, ...result.params, ...(result.delays ?? [])];
    const children = rows.map((r, k) => {
      const id = `${item.id}#${rowLabel(r)}`;
      const child = item.children.get(id) ?? controller.createTestItem(id, rowLabel(r), scenarioUri);
      child.description = `adjoint ${fmt(r.adjoint)}`;
      child.sortText = String(k).padStart(5, '0'); // the report's order: weights by projection, then parameters, then delays
      return { child, row: r };
    });
    item.children.replace(children.map((c) => c.child));
    for (const { child, row } of children) {
      if (onlyRows && !onlyRows.has(child.id)) continue;
      run.started(child);
      if (row.status === 'ok') run.passed(child);
      else run.failed(child, rowMessage(row, result.tolerance));
    }
    run.appendOutput(`${label}: ${result.passed ? 'passed' : 'did not pass'}; largest relative error ${result.maxRelativeError === null ? 'n/a' : result.maxRelativeError.toExponential(2)}` +
      ` over ${rows.length} rows (${result.timing.total_ms.toFixed(0)} ms)\r\n`, undefined, item);
    if (onlyRows) return;
    if (result.passed) run.passed(item, result.timing.total_ms);
    else {
      const messages = [...result.errors.map((e) => e.message), ...result.warnings.map((w) => w.message)];
      const worst = result.worst ? `worst row ${result.worst.label}` : 'no row could be compared';
      run.failed(item, new vscode.TestMessage(`the adjoint gradients do not agree with finite differences (${worst})${messages.length ? `: ${messages.join('; ')}` : ''}`), result.timing.total_ms);
    }
  };

  const runHandler = async (request: vscode.TestRunRequest, token: vscode.CancellationToken): Promise<void> => {
    const run = controller.createTestRun(request);
    try {
      // scenarios to run, with the rows asked for (undefined: the whole scenario)
      const plan = new Map<vscode.TestItem, Set<string> | undefined>();
      const excluded = new Set((request.exclude ?? []).map((i) => i.id));
      const include = request.include ?? [...gather(controller.items)];
      for (const i of include) {
        if (excluded.has(i.id)) continue;
        if (i.parent) {
          if (plan.has(i.parent) && plan.get(i.parent) === undefined) continue;
          const rows = plan.get(i.parent) ?? new Set<string>();
          rows.add(i.id);
          plan.set(i.parent, rows);
        } else plan.set(i, undefined);
      }
      for (const [item, rows] of plan) {
        if (token.isCancellationRequested) { run.skipped(item); continue; }
        await runScenario(run, item, rows, token);
      }
    } finally {
      run.end();
    }
  };

  controller.createRunProfile('Cross-check', vscode.TestRunProfileKind.Run, (r, t) => runHandler(r, t), true);
  controller.refreshHandler = () => discover();
  void discover();

  const scenarios = vscode.workspace.createFileSystemWatcher(SCENARIO_GLOB);
  const models = vscode.workspace.createFileSystemWatcher('**/*.saltus', false, true, false);
  const again = (): void => { void discover(); };
  return [controller, scenarios, models, scenarios.onDidCreate(again), scenarios.onDidDelete(again), models.onDidCreate(again), models.onDidDelete(again),
    vscode.workspace.onDidChangeWorkspaceFolders(again)];
}

function* gather(items: vscode.TestItemCollection): Generator<vscode.TestItem> {
  const all: vscode.TestItem[] = [];
  items.forEach((i) => { all.push(i); });
  yield* all;
}
