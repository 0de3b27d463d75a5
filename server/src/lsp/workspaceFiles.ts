// The .saltus files of the workspace folders the client announced (initialize's
// workspaceFolders, else its rootUri, then workspace/didChangeWorkspaceFolders), for
// workspace symbols: the neurons of files that are not open in the editor. The only place
// where the language server reads the disk.
//
// Invariants: reads only inside the announced folders: the walk never follows a symbolic
// link, so it cannot leave them; reads only regular files named *.saltus of at most
// MAX_FILE_BYTES; skips dot-folders and node_modules; bounded by MAX_ENTRIES directory
// entries and MAX_FILES files per walk (a larger workspace is cut off, and the log says so);
// a file is parsed again only when its size or modification time changed; never writes.
import type { Dirent } from 'node:fs';
import { lstat, readdir, readFile } from 'node:fs/promises';
import { join, resolve, sep } from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { LineIndex, type Position } from '../base/lineIndex';
import { neuronSymbolsOfText } from '../outputs/workspaceSymbols';

/** Larger files are not read (the analysis itself stops at 4 MiB; symbols need far less). */
export const MAX_FILE_BYTES = 1024 * 1024;
/** Directory entries one walk looks at, at most. */
export const MAX_ENTRIES = 50_000;
/** .saltus files one walk reads, at most. */
export const MAX_FILES = 2_000;
/** How long a walk's list of files is reused before the folders are walked again (ms). */
const LIST_TTL_MS = 3_000;
const SKIP_DIRS = new Set(['node_modules']);

export interface FileNeuron { name: string; range: { start: Position; end: Position }; selectionRange: { start: Position; end: Position } }
export interface FileNeurons { uri: string; path: string; neurons: FileNeuron[] }

/** The local path of a file: URI, or undefined for any other scheme or a malformed one. */
export function pathOfUri(uri: string): string | undefined {
  if (!/^file:/i.test(uri)) return undefined;
  try { return resolve(fileURLToPath(uri)); } catch { return undefined; }
}

export class WorkspaceFiles {
  private folders: string[] = [];
  private listed: { at: number; files: string[] } | undefined;
  private readonly parsed = new Map<string, { size: number; mtimeMs: number; neurons: FileNeuron[] }>();

  constructor(private readonly log: (message: string) => void) {}

  /** Replaces the folders (file: URIs; others are ignored). */
  setFolders(uris: readonly string[]): void {
    this.folders = [...new Set(uris.map(pathOfUri).filter((p): p is string => p !== undefined))];
    this.listed = undefined;
  }
  addFolders(uris: readonly string[]): void { this.setFolders([...this.folders.map((f) => pathToFileURL(f).href), ...uris]); }
  removeFolders(uris: readonly string[]): void {
    const gone = new Set(uris.map(pathOfUri));
    this.setFolders(this.folders.filter((f) => !gone.has(f)).map((f) => pathToFileURL(f).href));
  }
  get folderPaths(): readonly string[] { return this.folders; }

  /** Whether `path` lies inside one of the announced folders. */
  contains(path: string): boolean {
    const p = resolve(path);
    return this.folders.some((f) => p === f || p.startsWith(f.endsWith(sep) ? f : f + sep));
  }

  /** The neurons of every .saltus file in the folders, except the paths in `skip` (open documents). */
  async neurons(skip: ReadonlySet<string>, cancelled: () => boolean = () => false): Promise<FileNeurons[]> {
    const files = await this.list(cancelled);
    const out: FileNeurons[] = [];
    for (const path of files) {
      if (cancelled()) break;
      if (skip.has(path)) continue;
      const neurons = await this.neuronsOf(path);
      if (neurons && neurons.length > 0) out.push({ uri: pathToFileURL(path).href, path, neurons });
    }
    return out;
  }

  private async neuronsOf(path: string): Promise<FileNeuron[] | undefined> {
    try {
      const st = await lstat(path);
      if (!st.isFile() || st.size > MAX_FILE_BYTES) return undefined;
      const hit = this.parsed.get(path);
      if (hit && hit.size === st.size && hit.mtimeMs === st.mtimeMs) return hit.neurons;
      const text = await readFile(path, 'utf8');
      if (text.length > MAX_FILE_BYTES) return undefined;
      const lines = new LineIndex(text);
      const at = (r: { start: number; end: number }): FileNeuron['range'] => ({ start: lines.positionAt(r.start), end: lines.positionAt(r.end) });
      const neurons = neuronSymbolsOfText(text).map((n) => ({ name: n.name, range: at(n.range), selectionRange: at(n.selectionRange) }));
      this.parsed.set(path, { size: st.size, mtimeMs: st.mtimeMs, neurons });
      return neurons;
    } catch (e) {
      this.parsed.delete(path);
      this.log(`saltus: workspace symbols: skipped ${path}: ${(e as Error).message}`);
      return undefined;
    }
  }

  /** The .saltus files under the folders (breadth first, bounded), reused for LIST_TTL_MS. */
  private async list(cancelled: () => boolean): Promise<string[]> {
    if (this.listed && performance.now() - this.listed.at < LIST_TTL_MS) return this.listed.files;
    const files: string[] = [];
    let entries = 0, cut = false;
    const queue = [...this.folders];
    const seen = new Set<string>();
    while (queue.length > 0 && !cancelled()) {
      const dir = queue.shift()!;
      if (seen.has(dir)) continue;
      seen.add(dir);
      let list: Dirent[];
      try { list = await readdir(dir, { withFileTypes: true }); } catch { continue; }
      list.sort((x, y) => (x.name < y.name ? -1 : x.name > y.name ? 1 : 0));
      for (const e of list) {
        if (++entries > MAX_ENTRIES || files.length >= MAX_FILES) { cut = true; break; }
        if (e.isSymbolicLink()) continue; // never leave the folders through a link
        if (e.isDirectory()) { if (!e.name.startsWith('.') && !SKIP_DIRS.has(e.name)) queue.push(join(dir, e.name)); }
        else if (e.isFile() && e.name.endsWith('.saltus')) files.push(join(dir, e.name));
      }
      if (cut) break;
    }
    if (cut) this.log(`saltus: workspace symbols: the workspace has more than ${MAX_FILES} .saltus files or ${MAX_ENTRIES} entries; the rest is not searched`);
    // forget parses of files that are gone
    const keep = new Set(files);
    for (const p of this.parsed.keys()) if (!keep.has(p)) this.parsed.delete(p);
    if (!cancelled()) this.listed = { at: performance.now(), files };
    return files;
  }
}
