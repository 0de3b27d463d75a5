// `saltus lsp --stdio | --node-ipc`: runs the Saltus language server in this process.
// vscode-languageserver's createConnection() reads the transport flag from process.argv,
// so the flag given here is the one the server uses. With --stdio, stdout belongs to the
// protocol: this command prints nothing itself. The server's code (and vscode-languageserver)
// is loaded only when this command runs, so the CLI's other commands start without it.
import { parseCommandArgs, UsageError, type Command } from '../command';

export const lspCommand: Command = {
  name: 'lsp',
  summary: 'run the language server (for editors), e.g. saltus lsp --stdio',
  help: `Usage: saltus lsp --stdio
       saltus lsp --node-ipc

Runs the Saltus language server until the editor disconnects.

Options:
  --stdio                 talk LSP over stdin/stdout (most editors)
  --node-ipc              talk LSP over a Node IPC channel (a Node parent process)
  --clientProcessId=PID   stop when that process ends (editors pass it themselves)
  -h, --help              show this help`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('lsp', argv, {
      stdio: { type: 'boolean' },
      'node-ipc': { type: 'boolean' },
      clientProcessId: { type: 'string' },
    });
    if (values.help) {
      io.out(lspCommand.help + '\n');
      return { exitCode: 0 };
    }
    if (positionals.length > 0) throw new UsageError(`unexpected argument '${positionals[0]}'`, 'lsp');
    if (values.stdio === values['node-ipc']) throw new UsageError('give exactly one transport: --stdio or --node-ipc', 'lsp');
    const { runLanguageServer } = await import('../../lsp/main');
    runLanguageServer();
    return { keepRunning: true };
  },
};
