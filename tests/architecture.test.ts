// The layering of ARCHITECTURE.md, checked on the import graph of server/src:
// - base/ imports nothing of ours above it;
// - no stage below the faces (everything but outputs/, cli/, lsp/) imports outputs/, cli/ or lsp/;
// - outputs/ imports neither cli/ nor lsp/;
// - the faces (outputs/, cli/, lsp/) reach learning rules only through rules/ (the registry);
// - only lsp/ imports vscode-languageserver, nothing imports vscode;
// - no import circle between files (type-only imports count: a circle is a circle).
import { describe, expect, it } from 'vitest';
import { readFileSync, readdirSync, existsSync } from 'node:fs';
import { dirname, join, relative, resolve } from 'node:path';

const SRC = join(__dirname, '..', 'server', 'src');

function sources(dir: string): string[] {
  return readdirSync(dir, { withFileTypes: true }).flatMap((e) => {
    const p = join(dir, e.name);
    return e.isDirectory() ? sources(p) : p.endsWith('.ts') ? [p] : [];
  });
}

interface Edge { from: string; to: string; spec: string }

function graph(): { files: string[]; edges: Edge[]; packages: Map<string, string[]> } {
  const files = sources(SRC);
  const edges: Edge[] = [];
  const packages = new Map<string, string[]>();
  for (const f of files) {
    const text = readFileSync(f, 'utf8');
    for (const m of text.matchAll(/(?:import|export)\s+(?:type\s+)?(?:[^'";]*?\s+from\s+)?['"]([^'"]+)['"]/g)) {
      const spec = m[1]!;
      if (!spec.startsWith('.')) { packages.set(f, [...(packages.get(f) ?? []), spec]); continue; }
      let to = resolve(dirname(f), spec);
      if (existsSync(`${to}.ts`)) to = `${to}.ts`;
      else if (existsSync(join(to, 'index.ts'))) to = join(to, 'index.ts');
      edges.push({ from: f, to, spec });
    }
  }
  return { files, edges, packages };
}

const top = (f: string): string => relative(SRC, f).split(/[\\/]/)[0]!;
const FACES = ['outputs', 'cli', 'lsp'];

describe('architecture: layers and import graph of server/src', () => {
  const g = graph();

  it('base/ imports only base/', () => {
    const bad = g.edges.filter((e) => top(e.from) === 'base' && top(e.to) !== 'base' && !e.to.endsWith('package.json'));
    expect(bad.map((e) => `${relative(SRC, e.from)} -> ${e.spec}`)).toEqual([]);
  });

  it('no stage below the faces imports outputs/, cli/ or lsp/', () => {
    const bad = g.edges.filter((e) => !FACES.includes(top(e.from)) && FACES.includes(top(e.to)));
    expect(bad.map((e) => `${relative(SRC, e.from)} -> ${e.spec}`)).toEqual([]);
  });

  it('outputs/ imports neither cli/ nor lsp/', () => {
    const bad = g.edges.filter((e) => top(e.from) === 'outputs' && ['cli', 'lsp'].includes(top(e.to)));
    expect(bad.map((e) => `${relative(SRC, e.from)} -> ${e.spec}`)).toEqual([]);
  });

  it('the faces reach learning rules only through the registry (rules/), never a rule\'s stage (adjoint/, eprop/)', () => {
    const bad = g.edges.filter((e) => FACES.includes(top(e.from)) && ['adjoint', 'eprop'].includes(top(e.to)));
    expect(bad.map((e) => `${relative(SRC, e.from)} -> ${e.spec}`)).toEqual([]);
  });
  it('negative control: the rule check sees a face importing a rule stage', () => {
    const made: Edge = { from: join(SRC, 'outputs', 'x.ts'), to: join(SRC, 'eprop', 'index.ts'), spec: '../eprop/index' };
    expect([made].filter((e) => FACES.includes(top(e.from)) && ['adjoint', 'eprop'].includes(top(e.to)))).toHaveLength(1);
  });
  it('only lsp/ and the server entry import vscode-languageserver; nothing imports vscode', () => {
    const bad: string[] = [];
    for (const [f, specs] of g.packages) {
      for (const s of specs) {
        if (s === 'vscode') bad.push(`${relative(SRC, f)} imports vscode`);
        if (s.startsWith('vscode-languageserver') && top(f) !== 'lsp') bad.push(`${relative(SRC, f)} imports ${s}`);
      }
    }
    expect(bad).toEqual([]);
  });

  it('has no import circle between files', () => {
    const adj = new Map<string, string[]>();
    for (const e of g.edges) adj.set(e.from, [...(adj.get(e.from) ?? []), e.to]);
    expect(circles(g.files, adj).map((c) => c.map((f) => relative(SRC, f)))).toEqual([]);
  });

  it('negative control: the circle finder reports a made-up three-file circle and nothing in a chain', () => {
    expect(circles(['a', 'b', 'c', 'd'], new Map([['a', ['b']], ['b', ['c']], ['c', ['a']], ['d', ['a']]]))).toEqual([['a', 'b', 'c']]);
    expect(circles(['a', 'b', 'c'], new Map([['a', ['b']], ['b', ['c']]]))).toEqual([]);
  });
});

/** The import circles (strongly connected components with more than one file; Tarjan 1972). */
function circles(files: readonly string[], adj: ReadonlyMap<string, readonly string[]>): string[][] {
  let index = 0;
  const idx = new Map<string, number>(), low = new Map<string, number>(), stack: string[] = [], on = new Set<string>();
  const out: string[][] = [];
  const visit = (v: string): void => {
    idx.set(v, index); low.set(v, index); index++; stack.push(v); on.add(v);
    for (const w of adj.get(v) ?? []) {
      if (!idx.has(w)) { visit(w); low.set(v, Math.min(low.get(v)!, low.get(w)!)); }
      else if (on.has(w)) low.set(v, Math.min(low.get(v)!, idx.get(w)!));
    }
    if (low.get(v) === idx.get(v)) {
      const c: string[] = [];
      let w: string;
      do { w = stack.pop()!; on.delete(w); c.push(w); } while (w !== v);
      if (c.length > 1) out.push(c.sort());
    }
  };
  for (const f of files) if (!idx.has(f)) visit(f);
  return out;
}
