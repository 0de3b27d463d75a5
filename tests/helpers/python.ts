// Test helper: the Python interpreters the generated code is run with. The first `python3` on
// PATH may be a build without NumPy, or with a NumPy too new for Debian's PyTorch 1.13, which
// only /usr/bin/python3 sees (DEVELOPERS.md); each finder returns the first that imports what
// is asked, or undefined (tests that need it then say why they skip).
import { spawnSync } from 'node:child_process';

const CANDIDATES = ['python3', '/usr/bin/python3'];
const cache = new Map<string, string | undefined>();

function first(modules: string): string | undefined {
  if (cache.has(modules)) return cache.get(modules);
  const found = CANDIDATES.find((py) => spawnSync(py, ['-c', `import ${modules}`], { encoding: 'utf8' }).status === 0);
  cache.set(modules, found);
  return found;
}

/** A python3 that imports numpy. */
export const numpyPython = (): string | undefined => first('numpy');
/** A python3 that imports torch and numpy. */
export const torchPython = (): string | undefined => first('torch, numpy');

/** Runs `python args...` in `cwd`; throws with stderr on a non-zero exit. */
export function runPython(python: string, args: string[], cwd: string, input?: string): string {
  const r = spawnSync(python, args, { cwd, input, encoding: 'utf8', maxBuffer: 1 << 28, timeout: 600_000 });
  if (r.status !== 0) throw new Error(`${python} ${args.join(' ')} failed (${r.status}):\n${r.stderr}`);
  return r.stdout;
}
