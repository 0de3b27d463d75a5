// `saltus migrate FILE... [--write | --stdout]`: rewrites the deprecated quoted docstrings of
// each file as `#~` notes (syntax/migrate.ts, which checks every rewrite before offering it).
// Nothing is written unless asked: by default a unified diff goes to stdout; `--stdout`
// prints the rewritten text of one file; `--write` replaces each file that changes, atomically
// (a temporary file beside it, renamed over it), and only when the file still holds what was
// read. A byte-order mark and the file's permissions are kept.
import { chmodSync, readFileSync, renameSync, statSync, unlinkSync, writeFileSync } from 'node:fs';
import { basename, dirname, join } from 'node:path';
import { migrateText } from '../../syntax/migrate';
import { parseCommandArgs, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';
import { unifiedDiff } from '../report/unifiedDiff';

const BOM = Buffer.from([0xef, 0xbb, 0xbf]);

export const migrateCommand: Command = {
  name: 'migrate',
  summary: 'rewrite old quoted docstrings as #~ notes (shows a diff; writes only with --write)',
  help: `Usage: saltus migrate FILE... [--write | --stdout]

Rewrites every quoted docstring ("text" after a declaration, the old form of
documentation) as a #~ note: at the end of its line, or on the line above when
something follows it. Each rewrite is checked before it is used: the same code,
and every declaration documented exactly as before.

By default nothing is written: a unified diff of each file that would change is
printed on stdout.

Options:
  --write     replace each file that changes, atomically (a temporary file beside
              it is renamed over it); a file changed since it was read is left alone
  --stdout    print the rewritten text of one FILE on stdout (nothing is written)
  -h, --help  show this help

Exit status: 0 nothing left to rewrite (or everything written), 1 the diff shows
             rewrites still to make, or a file could not be rewritten safely,
             2 usage error or an unreadable file.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('migrate', argv, { write: { type: 'boolean' }, stdout: { type: 'boolean' } });
    if (values.help) { io.out(migrateCommand.help + '\n'); return { exitCode: 0 }; }
    if (values.write && values.stdout) throw new UsageError('give --write or --stdout, not both', 'migrate');
    if (values.stdout && positionals.length !== 1) throw new UsageError('--stdout prints one file: give exactly one FILE', 'migrate');
    const sources = readSourceFiles('migrate', positionals, io.cwd);
    let pending = false, failed = false, written = 0;
    for (const source of sources) {
      const m = migrateText(source.text);
      if (m.problem) {
        io.err(`saltus migrate: ${source.path}: not rewritten: ${m.problem}\n`);
        failed = true;
        if (values.stdout) io.out(source.text);
        continue;
      }
      if (values.stdout) { io.out(m.text); continue; }
      if (m.rewritten === 0) continue;
      if (!values.write) {
        io.out(unifiedDiff(source.text, m.text, `${source.path}`, `${source.path} (migrated)`));
        pending = true;
        continue;
      }
      const problem = writeInPlace(source.absolute, source.text, m.text);
      if (problem) { io.err(`saltus migrate: ${source.path}: not written: ${problem}\n`); failed = true; continue; }
      written++;
      io.err(`saltus migrate: ${source.path}: ${m.rewritten} docstring${m.rewritten === 1 ? '' : 's'} rewritten\n`);
    }
    if (values.write && written === 0 && !failed) io.err('saltus migrate: nothing to rewrite\n');
    if (!values.write && !values.stdout && !pending && !failed) io.err('saltus migrate: nothing to rewrite\n');
    return { exitCode: failed || pending ? 1 : 0 };
  },
};

/** Replaces the file atomically when it still holds `was`; returns why not otherwise. */
function writeInPlace(path: string, was: string, text: string): string | undefined {
  const temp = join(dirname(path), `.${basename(path)}.migrate-${process.pid}.tmp`);
  try {
    const bytes = readFileSync(path);
    const hasBom = bytes.subarray(0, 3).equals(BOM);
    const now = new TextDecoder('utf-8', { fatal: false }).decode(hasBom ? bytes.subarray(3) : bytes);
    if (now !== was) return 'it changed while it was being read; run saltus migrate again';
    const mode = statSync(path).mode & 0o7777;
    writeFileSync(temp, hasBom ? Buffer.concat([BOM, Buffer.from(text, 'utf8')]) : text, { flag: 'wx', mode });
    chmodSync(temp, mode);
    renameSync(temp, path);
    return undefined;
  } catch (e) {
    try { unlinkSync(temp); } catch { /* not created */ }
    return (e as Error).message;
  }
}
