// dist/server.js: the entry of the Saltus language server (the VS Code client starts it over
// node IPC; other editors may run `node dist/server.js --stdio`). It runs the CLI bundle
// (dist/cli.js) as `saltus lsp`, compiled with a V8 code cache kept between starts: compiling
// the 1.4 MB bundle and the functions the first diagnostics need is most of a cold start, and
// the cache lets V8 skip both (docs/performance.md, P5).
//
// Where the cache lives: $SALTUS_CODE_CACHE_DIR (the VS Code client sets it to the extension's
// global storage), else $XDG_CACHE_HOME/saltus, else ~/.cache/saltus; SALTUS_CODE_CACHE=off
// turns it off; SALTUS_CODE_CACHE_LOG=1 says on stderr whether the cache was used. One file per bundle content, Node version, architecture and Node flags
// (`cli-<key>.v8cache`): V8 itself checks only the source's length, so the key carries a hash
// of the whole source. The file is written once (after the first diagnostics have had time to
// be published, or at exit) to a temporary name and renamed, so a reader sees a whole file or
// none; a rejected or unreadable cache only costs the compile it would have saved.
// Invariants: this file imports only Node built-ins (it is bundled alone); any failure of the
// cache falls back to a plain compile, never stops the server; it writes only its own
// `cli-*.v8cache` files in the cache directory, and keeps the newest few.
import { createHash } from 'node:crypto';
import { mkdirSync, readFileSync, readdirSync, renameSync, rmSync, statSync, writeFileSync } from 'node:fs';
import Module, { createRequire } from 'node:module';
import { homedir } from 'node:os';
import { join } from 'node:path';
import { Script } from 'node:vm';

const KEEP = 4;
const WRITE_AFTER_MS = 3000;

function cacheDirectory(): string | undefined {
  if (process.env.SALTUS_CODE_CACHE === 'off') return undefined;
  if (process.env.SALTUS_CODE_CACHE_DIR) return process.env.SALTUS_CODE_CACHE_DIR;
  if (process.env.XDG_CACHE_HOME) return join(process.env.XDG_CACHE_HOME, 'saltus');
  if (process.platform === 'win32' && process.env.LOCALAPPDATA) return join(process.env.LOCALAPPDATA, 'saltus', 'cache');
  try {
    const home = homedir();
    return home ? join(home, '.cache', 'saltus') : undefined;
  } catch {
    return undefined;
  }
}

/** The cache file for this source under this Node: content, version, architecture and flags. */
export function cacheFileName(source: string): string {
  const key = createHash('sha256').update(source).update('\0').update(process.version).update('\0')
    .update(process.arch).update('\0').update(process.execArgv.join(' ')).digest('hex').slice(0, 24);
  return `cli-${key}.v8cache`;
}

function readCache(dir: string | undefined, name: string): Buffer | undefined {
  if (!dir) return undefined;
  try {
    return readFileSync(join(dir, name));
  } catch {
    return undefined;
  }
}

function writeCache(dir: string, name: string, data: Buffer): void {
  try {
    mkdirSync(dir, { recursive: true });
    const tmp = join(dir, `${name}.${process.pid}.tmp`);
    writeFileSync(tmp, data);
    renameSync(tmp, join(dir, name));
    const ours = readdirSync(dir).filter((f) => /^cli-[0-9a-f]{24}\.v8cache$/.test(f) && f !== name)
      .map((f) => ({ f, t: statSync(join(dir, f)).mtimeMs })).sort((a, b) => b.t - a.t);
    for (const { f } of ours.slice(KEEP - 1)) rmSync(join(dir, f), { force: true });
  } catch {
    // a cache that cannot be written costs the next start its compile, nothing else
  }
}

/** Runs `file` (a CommonJS bundle) as the main program, through the code cache. */
export function runWithCodeCache(file: string): void {
  let source = readFileSync(file, 'utf8');
  if (source.startsWith('#!')) source = `//${source.slice(2)}`; // the shebang, kept as a comment: same length
  const dir = cacheDirectory();
  const name = cacheFileName(source);
  const cachedData = readCache(dir, name);
  let script: Script;
  try {
    script = new Script(Module.wrap(source), { filename: file, cachedData });
  } catch {
    script = new Script(Module.wrap(source), { filename: file });
  }
  if (process.env.SALTUS_CODE_CACHE_LOG === '1') {
    const state = !dir ? 'off' : !cachedData ? 'none yet' : script.cachedDataRejected ? 'rejected' : 'used';
    process.stderr.write(`saltus: code cache ${state}${dir ? ` (${join(dir, name)})` : ''}\n`);
  }
  if (dir && (!cachedData || script.cachedDataRejected)) {
    let written = false;
    const write = (): void => {
      if (written) return;
      written = true;
      writeCache(dir, name, script.createCachedData());
    };
    setTimeout(write, WRITE_AFTER_MS).unref();
    process.on('exit', write);
  }
  const mod = new Module(file, undefined);
  mod.filename = file;
  mod.paths = (Module as unknown as { _nodeModulePaths(d: string): string[] })._nodeModulePaths(join(file, '..'));
  const run = script.runInThisContext() as (exports: unknown, require: NodeRequire, module: Module, filename: string, dirname: string) => void;
  run.call(mod.exports, mod.exports, createRequire(file), mod, file, join(file, '..'));
}

// vscode-languageserver reads its transport (--node-ipc, --stdio) from process.argv
process.argv.splice(2, 0, 'lsp');
runWithCodeCache(join(__dirname, 'cli.js'));
