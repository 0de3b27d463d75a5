// Reads the .saltus files named on the command line, for every command that takes FILE...
// Invariants: never throws anything but UsageError; a failure names the path as the user
// wrote it and says why in words (missing, a directory, no permission, not UTF-8). The text
// is what an editor would hold: UTF-8 decoded, a leading byte-order mark removed, so that
// offsets (and so line/character positions) agree with the language server's.
import { readFileSync, statSync } from 'node:fs';
import { resolve } from 'node:path';
import { UsageError } from './command';

export interface SourceFile {
  /** The path as given on the command line. */
  path: string;
  /** The absolute path. */
  absolute: string;
  text: string;
}

const utf8 = new TextDecoder('utf-8', { fatal: true, ignoreBOM: false });

function describeFsError(e: unknown): string {
  const code = (e as NodeJS.ErrnoException).code;
  switch (code) {
    case 'ENOENT': return 'no such file';
    case 'EACCES': case 'EPERM': return 'permission denied';
    case 'EISDIR': return 'is a directory, not a .saltus file';
    case 'ENOTDIR': return 'a part of the path is not a directory';
    case 'ELOOP': return 'too many symbolic links';
    case 'ENAMETOOLONG': return 'the path is too long';
    default: return code ? `cannot be read (${code})` : `cannot be read (${(e as Error).message})`;
  }
}

/** Reads one file or explains why it cannot be read (message without the command prefix). */
export function readSourceFile(path: string, cwd: string): SourceFile | { path: string; problem: string } {
  const absolute = resolve(cwd, path);
  try {
    const st = statSync(absolute);
    if (st.isDirectory()) return { path, problem: 'is a directory, not a .saltus file' };
    if (!st.isFile()) return { path, problem: 'is not a regular file' };
    const bytes = readFileSync(absolute);
    let text: string;
    try {
      text = utf8.decode(bytes); // ignoreBOM: false drops a leading BOM, as editors do
    } catch {
      return { path, problem: 'is not valid UTF-8 text' };
    }
    return { path, absolute, text };
  } catch (e) {
    return { path, problem: describeFsError(e) };
  }
}

/**
 * Reads all files, or throws one UsageError listing every unreadable one, so that nothing
 * is checked half-way (a report never silently misses a file).
 */
export function readSourceFiles(command: string, paths: string[], cwd: string): SourceFile[] {
  if (paths.length === 0) throw new UsageError('no input files; give one or more .saltus files', command);
  const read = paths.map((p) => readSourceFile(p, cwd));
  const problems = read.filter((r): r is { path: string; problem: string } => 'problem' in r);
  if (problems.length > 0) {
    throw new UsageError(problems.map((p) => `${p.path}: ${p.problem}`).join('\n'), command, false);
  }
  return read as SourceFile[];
}
