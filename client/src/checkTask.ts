// `saltus check` as a VS Code task: one task "saltus: check" per workspace folder, checking
// every .saltus file in it with the CLI shipped in the extension (dist/cli.js, run by the
// Node inside VS Code: ELECTRON_RUN_AS_NODE), whose problems the `$saltus` problem matcher
// (package.json contributes.problemMatchers) reads from the CLI's
// `file:line:col: severity code: message` lines into the Problems panel. A tasks.json entry
// { "type": "saltus", "command": "check", "files": ["models/a.saltus"] } checks chosen files.
// Invariants: the task runs only the bundled CLI with file paths as arguments (no shell);
// colour is off (NO_COLOR) so the matcher sees plain lines.
import * as vscode from 'vscode';

export const TASK_TYPE = 'saltus';
export const PROBLEM_MATCHER = '$saltus';
const MAX_FILES = 2000;

interface CheckTaskDefinition extends vscode.TaskDefinition { type: 'saltus'; command: 'check'; files?: string[] }

const isCheck = (d: vscode.TaskDefinition): d is CheckTaskDefinition => d.type === TASK_TYPE && d.command === 'check';

async function checkTask(context: vscode.ExtensionContext, folder: vscode.WorkspaceFolder, definition: CheckTaskDefinition): Promise<vscode.Task> {
  let files = Array.isArray(definition.files) ? definition.files.filter((f): f is string => typeof f === 'string') : undefined;
  if (!files || files.length === 0) {
    const found = await vscode.workspace.findFiles(new vscode.RelativePattern(folder, '**/*.saltus'), '**/node_modules/**', MAX_FILES);
    files = found.map((u) => vscode.workspace.asRelativePath(u, false)).sort();
  }
  const cli = context.asAbsolutePath('dist/cli.js');
  const execution = new vscode.ProcessExecution(process.execPath, [cli, 'check', ...files], {
    cwd: folder.uri.fsPath, env: { ELECTRON_RUN_AS_NODE: '1', NO_COLOR: '1' },
  });
  const task = new vscode.Task(definition, folder, 'check', TASK_TYPE, execution, [PROBLEM_MATCHER]);
  task.detail = files.length === 0 ? 'no .saltus files in this folder' : `saltus check on ${files.length} file${files.length === 1 ? '' : 's'}`;
  task.presentationOptions = { reveal: vscode.TaskRevealKind.Silent, clear: true };
  return task;
}

export function registerCheckTask(context: vscode.ExtensionContext): vscode.Disposable {
  return vscode.tasks.registerTaskProvider(TASK_TYPE, {
    async provideTasks() {
      const folders = (vscode.workspace.workspaceFolders ?? []).filter((f) => f.uri.scheme === 'file');
      return Promise.all(folders.map((f) => checkTask(context, f, { type: TASK_TYPE, command: 'check' })));
    },
    async resolveTask(task) {
      if (!isCheck(task.definition) || typeof task.scope !== 'object' || !task.scope) return undefined;
      return checkTask(context, task.scope, task.definition);
    },
  });
}
