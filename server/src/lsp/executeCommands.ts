// workspace/executeCommand: what the CodeLenses do in any LSP client (lensCommands.ts).
//   saltus.server.showAdjoint [uri, neuron]
//       the neuron's derived adjoint as text, shown with window/showMessage; the reply is
//       { title, text } for clients that want to show it their own way.
//   saltus.server.generateCode [uri, neuron?, { target?, dir?, force? }?]
//       asks for the target with window/showMessageRequest (C99, CUDA, NumPy) unless given,
//       writes into `dir`, by default the folder `generated` in the workspace folder that
//       holds the model (else beside the model file), asks before overwriting a file edited
//       since Saltus wrote it, reports with window/showMessage and opens the first file
//       (window/showDocument) when the client can. The reply is the GenerateReply.
// Invariants: never throws to the connection (a failure is shown and logged, the reply is
// null); an unknown command or a document that is not open gives a message, not a crash;
// files are written only where code generation writes (codegen/write.ts: inside `dir`,
// atomically, never over an edited file without the modeller's yes).
import { dirname, join, sep } from 'node:path';
import { pathToFileURL } from 'node:url';
import { MessageType, type Connection, type MessageActionItem } from 'vscode-languageserver';
import { RULES } from '../rules/index';
import { CODE_TARGETS } from '../codegen/targets/index';
import { generateInto, type GenerateReply } from './derivedFeatures';
import type { DocumentState } from './documentState';
import { SERVER_COMMANDS } from './lensCommands';
import { pathOfUri } from './workspaceFiles';

/** The code targets as the question's answers (the registry, codegen/targets). */
const TARGETS = CODE_TARGETS.map((t) => ({ title: t.label, target: t.id }));
const OVERWRITE = 'Overwrite them';

export const EXECUTE_COMMANDS = Object.values(SERVER_COMMANDS);

interface GenerateOptions { target?: string; dir?: string; force?: boolean }

export function registerCommands(connection: Connection, state: DocumentState): void {
  const tell = (type: MessageType, message: string): void => { void connection.sendNotification('window/showMessage', { type, message }); };

  const showAdjoint = (uri: string, neuron: string | undefined): { title: string; text: string } | null => {
    const c = state.analysisFor(uri);
    if (!c) { tell(MessageType.Warning, `Saltus: ${uri} is not open in the editor.`); return null; }
    const models = c.analysis.model.neurons.filter((n) => neuron === undefined || n.name === neuron);
    if (models.length === 0) { tell(MessageType.Warning, `Saltus: no neuron ${neuron ?? ''} in this file.`); return null; }
    // every rule of the registry that applies to the neuron (EventProp always, e-prop with a surrogate)
    const texts = models.map((n) => (n.wellFormed ? RULES.filter((r) => !r.unavailable(n)).map((r) => r.render([n], 'text', {})).join('\n\n')
      : `${n.name}: fix the errors first; the adjoint is derived from a model without errors.`));
    const result = { title: `Derived adjoint of ${models.map((n) => n.name).join(', ')}`, text: texts.join('\n\n') };
    tell(MessageType.Info, result.text);
    return result;
  };

  const defaultDir = (file: string): string => {
    const folder = state.workspaceFolders().filter((f) => file.startsWith(f.endsWith(sep) ? f : f + sep)).sort((x, y) => y.length - x.length)[0];
    return join(folder ?? dirname(file), 'generated');
  };

  const generate = async (uri: string, neuron: string | undefined, o: GenerateOptions): Promise<GenerateReply | null> => {
    const c = state.analysisFor(uri);
    if (!c) { tell(MessageType.Warning, `Saltus: ${uri} is not open in the editor.`); return null; }
    const file = pathOfUri(uri);
    if (!file && o.dir === undefined) { tell(MessageType.Warning, 'Saltus: generated code goes into a folder beside the model; this document is not a local file.'); return null; }
    let target = TARGETS.find((t) => t.target === o.target || t.title === o.target)?.target;
    if (!target) {
      const pick = await connection.sendRequest<MessageActionItem | null>('window/showMessageRequest', {
        type: MessageType.Info, message: `Saltus: generate code${neuron ? ` for ${neuron}` : ''} in which language?`, actions: TARGETS.map((t) => ({ title: t.title })),
      });
      target = TARGETS.find((t) => t.title === pick?.title)?.target;
      if (!target) return null; // dismissed
    }
    const dir = o.dir ?? defaultDir(file!);
    const params = { target, dir, ...(neuron ? { model: neuron } : {}) };
    let reply = generateInto(c.analysis, uri, { ...params, force: o.force === true });
    if (reply.refused.length > 0 && o.force !== true) {
      const answer = await connection.sendRequest<MessageActionItem | null>('window/showMessageRequest', {
        type: MessageType.Warning, message: `Saltus: some files in ${reply.dir} were changed since Saltus wrote them: ${reply.refused.map((r) => `${r.name} (${r.reason})`).join('; ')}`,
        actions: [{ title: OVERWRITE }, { title: 'Keep them' }],
      });
      if (answer?.title !== OVERWRITE) return reply;
      reply = generateInto(c.analysis, uri, { ...params, force: true });
    }
    if (reply.errors.length) { tell(MessageType.Error, `Saltus could not generate code: ${reply.errors.join('; ')}`); return reply; }
    tell(MessageType.Info, `Saltus wrote ${reply.written.length} file(s) to ${reply.dir}` +
      (reply.unchanged.length ? ` (${reply.unchanged.length} already up to date)` : '') + (reply.renamed.length ? `. Renamed: ${reply.renamed.join(', ')}` : '') + '.');
    const first = [...reply.written, ...reply.unchanged][0];
    if (first && state.client().showDocument) {
      const path = first.startsWith('/') ? first : join(reply.dir, first);
      void connection.sendRequest('window/showDocument', { uri: pathToFileURL(path).href, takeFocus: false }).catch(() => undefined);
    }
    return reply;
  };

  connection.onExecuteCommand(async (p) => {
    const args = Array.isArray(p?.arguments) ? p.arguments : [];
    const uri = typeof args[0] === 'string' ? args[0] : undefined;
    const neuron = typeof args[1] === 'string' ? args[1] : undefined;
    try {
      if (!uri) { tell(MessageType.Warning, `Saltus: ${p?.command} needs the document's URI as its first argument.`); return null; }
      if (p.command === SERVER_COMMANDS.showAdjoint) return showAdjoint(uri, neuron);
      if (p.command === SERVER_COMMANDS.generateCode) {
        const o = typeof args[2] === 'object' && args[2] !== null ? args[2] as GenerateOptions : {};
        return await generate(uri, neuron, { ...(typeof o.target === 'string' ? { target: o.target } : {}),
          ...(typeof o.dir === 'string' ? { dir: o.dir } : {}), ...(o.force === true ? { force: true } : {}) });
      }
      tell(MessageType.Warning, `Saltus: unknown command ${String(p?.command)}`);
      return null;
    } catch (e) {
      state.log(`saltus: command ${String(p?.command)} failed: ${(e as Error)?.stack ?? String(e)}`);
      tell(MessageType.Error, `Saltus: ${String(p?.command)} failed: ${(e as Error)?.message ?? String(e)}`);
      return null;
    }
  });
}
