// writeGenerated: puts generated files into one output directory, safely.
//   - Only inside `dir`: every name must be a plain file name (no separator, no `..`, no
//     leading dot, no control character); the joined path is checked to lie directly in the
//     resolved directory. Nothing else on disk is touched.
//   - Never over a changed file: an existing file is replaced only when its saltus-hash line
//     says Saltus wrote it and it is unchanged since (hash.ts); a file that was edited, one
//     without a hash (not ours), a symbolic link or anything but a regular file is refused
//     unless `force`. When anything is refused, nothing at all is written.
//   - Atomically: each file is written to a temporary file in the same directory and renamed
//     over the target, so a reader sees the old or the new file, never a part.
// Invariants: never throws (problems come back in `refused` and `errors`); a temporary file
// never outlives the call.
import { closeSync, fsyncSync, lstatSync, mkdirSync, openSync, readFileSync, realpathSync, renameSync, statSync, unlinkSync, writeSync } from 'node:fs';
import { basename, dirname, join, resolve } from 'node:path';
import { randomBytes } from 'node:crypto';
import { checkHash } from './hash';

export interface WriteOptions {
  /** Replace files that changed since Saltus wrote them, or that Saltus did not write. */
  force?: boolean;
  /** Resolve a relative `dir` against this directory (default: the process's). */
  cwd?: string;
}

export interface WriteResult {
  /** The directory written to (absolute, symbolic links resolved). */
  dir: string;
  written: string[];
  /** Files already present with exactly this content (left alone). */
  unchanged: string[];
  refused: { name: string; reason: string }[];
  errors: string[];
}

const SAFE_NAME = /^[A-Za-z0-9_][A-Za-z0-9_.+-]*$/; // a leading underscore: Python's __init__.py

/** Why `name` is not a plain file name, or null when it is. */
export function unsafeName(name: string): string | null {
  if (typeof name !== 'string' || name.length === 0) return 'an empty file name';
  if (name.length > 200) return 'a file name longer than 200 characters';
  if (name.includes('/') || name.includes('\\')) return 'a file name with a directory separator';
  if (name.includes('..')) return 'a file name with ".."';
  if (!SAFE_NAME.test(name)) return 'a file name with characters other than letters, digits and _ . + - (or a leading dot)';
  return null;
}

function describe(e: unknown): string {
  const err = e as NodeJS.ErrnoException;
  return err?.code ? `${err.code}: ${err.message}` : String((e as Error)?.message ?? e);
}

export function writeGenerated(dir: string, files: readonly { name: string; content: string }[], options: WriteOptions = {}): WriteResult {
  const result: WriteResult = { dir: '', written: [], unchanged: [], refused: [], errors: [] };
  if (typeof dir !== 'string' || dir.length === 0 || dir.includes('\0')) { result.errors.push('the output directory must be a non-empty path'); return result; }
  const wanted = resolve(options.cwd ?? process.cwd(), dir);
  try {
    const st = statSync(wanted, { throwIfNoEntry: false });
    if (st && !st.isDirectory()) { result.errors.push(`${dir} exists and is not a directory`); return result; }
    if (!st) mkdirSync(wanted, { recursive: true });
    result.dir = realpathSync(wanted);
  } catch (e) {
    result.errors.push(`cannot create the output directory ${dir}: ${describe(e)}`);
    return result;
  }
  const seen = new Set<string>();
  const plan: { name: string; path: string; content: string }[] = [];
  for (const f of files) {
    const bad = unsafeName(f.name);
    if (bad) { result.refused.push({ name: String(f.name), reason: `${bad}: generated files are written only directly into the output directory` }); continue; }
    const path = join(result.dir, f.name);
    if (dirname(path) !== result.dir || basename(path) !== f.name) { result.refused.push({ name: f.name, reason: 'it would lie outside the output directory' }); continue; }
    if (seen.has(f.name.toLowerCase())) { result.refused.push({ name: f.name, reason: 'two files of this name (letter case aside) in one generation' }); continue; }
    seen.add(f.name.toLowerCase());
    let st;
    try { st = lstatSync(path, { throwIfNoEntry: false }); } catch (e) { result.errors.push(`${f.name}: ${describe(e)}`); continue; }
    if (st) {
      if (st.isSymbolicLink()) {
        if (!options.force) { result.refused.push({ name: f.name, reason: 'it is a symbolic link; Saltus does not write through links (--force replaces the link itself)' }); continue; }
      } else if (!st.isFile()) {
        result.refused.push({ name: f.name, reason: 'something other than a regular file is in the way' });
        continue;
      } else {
        let old: string;
        try { old = readFileSync(path, 'utf8'); } catch (e) { result.errors.push(`${f.name}: cannot be read: ${describe(e)}`); continue; }
        if (old === f.content) { result.unchanged.push(path); continue; }
        const h = checkHash(old);
        if (h.kind !== 'unmodified' && !options.force) {
          result.refused.push({ name: f.name, reason: h.kind === 'modified'
            ? 'it was changed since Saltus wrote it (its content no longer matches its saltus-hash line); keep your edits elsewhere or use --force to overwrite'
            : 'it was not written by Saltus (no saltus-hash line); use --force to overwrite it' });
          continue;
        }
      }
    }
    plan.push({ name: f.name, path, content: f.content });
  }
  if (result.refused.length || result.errors.length) return result;
  for (const f of plan) {
    const temp = join(result.dir, `.${f.name}.${process.pid}.${randomBytes(6).toString('hex')}.tmp`);
    let fd: number | undefined;
    try {
      fd = openSync(temp, 'wx', 0o644);
      writeSync(fd, f.content, null, 'utf8');
      fsyncSync(fd);
      closeSync(fd);
      fd = undefined;
      renameSync(temp, f.path);
      result.written.push(f.path);
    } catch (e) {
      if (fd !== undefined) try { closeSync(fd); } catch { /* already reported */ }
      try { unlinkSync(temp); } catch { /* it may not exist */ }
      result.errors.push(`${f.name}: could not be written: ${describe(e)}`);
    }
  }
  return result;
}
