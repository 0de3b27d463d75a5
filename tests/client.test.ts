// Consistency of the VS Code extension's manifest (package.json) with the files and code it
// points at: contributed paths exist (skipped with a note while another part is unwritten),
// grammar scope names agree, every command has a title and category and is registered by
// client/src/extension.ts (and nothing else is), configuration keys are documented, and
// .vscodeignore keeps every file the manifest needs. Rules from VS Code's extension manifest
// reference (contributes.*, capabilities.*), from memory.
import { existsSync, readFileSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';

const root = resolve(__dirname, '..');
const pkg = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8'));
const contributes = pkg.contributes;
const extensionSource = readFileSync(join(root, 'client/src/extension.ts'), 'utf8');

/** Parses JSON with comments and trailing commas (VS Code reads these files as JSONC). */
function parseJsonc(text: string): unknown {
  let out = '';
  for (let i = 0; i < text.length; i++) {
    const c = text[i]!;
    if (c === '"') {
      let j = i + 1;
      while (j < text.length && text[j] !== '"') j += text[j] === '\\' ? 2 : 1;
      out += text.slice(i, j + 1);
      i = j;
    } else if (c === '/' && text[i + 1] === '/') {
      while (i < text.length && text[i] !== '\n') i++;
      out += '\n';
    } else if (c === '/' && text[i + 1] === '*') {
      i = text.indexOf('*/', i + 2) + 1;
      if (i === 0) throw new Error('unterminated comment');
    } else out += c;
  }
  return JSON.parse(out.replace(/,(\s*[}\]])/g, '$1'));
}

function local(path: string): string {
  return join(root, path.replace(/^\.\//, ''));
}

const contributedFiles: [string, string][] = [
  ...contributes.languages.map((l: { configuration: string }) => ['language configuration', l.configuration]),
  ...contributes.grammars.map((g: { path: string }) => ['grammar', g.path]),
  ...contributes.snippets.map((s: { path: string }) => ['snippets', s.path]),
];

describe('package.json manifest', () => {
  it('points main at the bundled client, bin at the CLI, and lets VS Code infer activation', () => {
    expect(pkg.main).toBe('./dist/client.js');
    expect(pkg.bin).toEqual({ saltus: './dist/cli.js' });
    expect(pkg.activationEvents).toBeUndefined();
    const build = readFileSync(join(root, 'scripts/build.mjs'), 'utf8');
    for (const out of ['dist/client.js', 'dist/cli.js', 'dist/server.js']) expect(build).toContain(`'${out}'`);
    expect(extensionSource).toContain("path.join('dist', 'server.js')");
  });

  it('declares the saltus language with its extension', () => {
    expect(contributes.languages).toEqual([expect.objectContaining({ id: 'saltus', aliases: ['Saltus'], extensions: ['.saltus'] })]);
    for (const g of [...contributes.grammars, ...contributes.snippets]) expect(g.language).toBe('saltus');
    expect(extensionSource).toContain("documentSelector: [{ language: 'saltus' }]");
  });

  for (const [what, path] of contributedFiles) {
    it(`${what} file ${path} exists and parses`, (ctx) => {
      if (!existsSync(local(path))) ctx.skip(`${path} is not written yet (another part of the project)`);
      const doc = parseJsonc(readFileSync(local(path), 'utf8')) as Record<string, unknown>;
      expect(typeof doc).toBe('object');
      if (what === 'grammar') {
        const g = contributes.grammars.find((x: { path: string }) => x.path === path);
        expect(doc.scopeName).toBe(g.scopeName);
      }
      if (what === 'snippets') {
        for (const [name, s] of Object.entries(doc)) {
          const snip = s as { prefix?: unknown; body?: unknown; description?: unknown };
          // VS Code snippet format: prefix and body are a string or a list of strings.
          const texts = (v: unknown): unknown[] => (Array.isArray(v) ? v : [v]);
          for (const p of texts(snip.prefix)) expect(p, `${name}: prefix`).toMatch(/^\S+$/);
          expect(texts(snip.body).every((l) => typeof l === 'string'), `${name}: body lines`).toBe(true);
          expect(texts(snip.body).join('\n'), `${name}: body`).toMatch(/\S/);
        }
      }
    });
  }

  it('gives every command a title and the Saltus category, and registers exactly those', () => {
    const ids = contributes.commands.map((c: { command: string }) => c.command);
    expect(new Set(ids).size).toBe(ids.length);
    for (const c of contributes.commands) {
      expect(c.command).toMatch(/^saltus\.[a-zA-Z]+$/);
      expect(c.title.length).toBeGreaterThan(3);
      expect(c.category).toBe('Saltus');
    }
    const registered = [...extensionSource.matchAll(/registerCommand\(\s*'([^']+)'/g)].map((m) => m[1]);
    expect(registered.sort()).toEqual([...ids].sort());
  });

  it('documents every configuration key with a type and a default that fits', () => {
    const props = Object.entries(contributes.configuration.properties) as [string, Record<string, unknown>][];
    expect(props.map(([k]) => k).sort()).toEqual(['saltus.diagnostics.when', 'saltus.timestep', 'saltus.trace.server']);
    for (const [key, p] of props) {
      expect(key).toMatch(/^saltus\./);
      const doc = (p.markdownDescription ?? p.description) as string | undefined;
      expect(doc && doc.length > 20, `${key} needs a description`).toBe(true);
      expect(p.type, key).toBeTypeOf('string');
      expect(p.default, key).toBeDefined();
      expect(typeof p.default, key).toBe(p.type);
      if (p.enum) {
        expect(p.enum as unknown[], key).toContain(p.default);
        expect((p.enumDescriptions as unknown[] | undefined)?.length, `${key} enumDescriptions`).toBe((p.enum as unknown[]).length);
      }
    }
    // vscode-languageclient reads `<client id>.trace.server`: the id must be 'saltus'.
    expect(extensionSource).toMatch(/new LanguageClient\('saltus'/);
    expect(extensionSource).toContain("configurationSection: 'saltus'");
  });

  it('states its workspace-trust and virtual-workspace support with reasons', () => {
    for (const key of ['untrustedWorkspaces', 'virtualWorkspaces']) {
      const cap = pkg.capabilities[key];
      expect([true, false, 'limited']).toContain(cap.supported);
      if (cap.supported === 'limited') expect(cap.description.length).toBeGreaterThan(20);
    }
  });

  it('keeps in the .vsix every file the manifest and the client need', () => {
    const lines = readFileSync(join(root, '.vscodeignore'), 'utf8').split('\n').map((l) => l.trim());
    expect(lines).toContain('**');
    const kept = new Set(lines.filter((l) => l.startsWith('!')).map((l) => l.slice(1)));
    const needed = [pkg.main, ...contributedFiles.map(([, p]) => p), './dist/server.js', './package.json'];
    for (const p of needed) expect(kept.has(p.replace(/^\.\//, '')), `${p} must be kept by a ! line`).toBe(true);
    expect(kept.has('dist/katex/**')).toBe(true);
  });
});
