// The docs cite only files that are in the repository, and speak to modellers, not about how
// the project is run: every Markdown link and every backticked `*.md` path in the tracked
// Markdown files, source comments and tests resolves to a tracked file, and no tracked text
// outside the changelog uses the project's internal wording.
import { execFileSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { describe, expect, test } from 'vitest';

const root = join(__dirname, '..');
const tracked = execFileSync('git', ['ls-files'], { cwd: root, encoding: 'utf8' }).split('\n').filter((f) => f && existsSync(join(root, f)));
const markdown = tracked.filter((f) => f.endsWith('.md') && f !== 'CHANGELOG.md');
const sources = tracked.filter((f) => /\.(ts|mjs|md|saltus|json)$/.test(f) && f !== 'CHANGELOG.md' && f !== 'package-lock.json' && f !== 'tests/docs-links.test.ts');

describe('docs cite what the repository holds', () => {
  test('every relative Markdown link resolves', () => {
    const missing: string[] = [];
    for (const f of markdown) {
      const text = readFileSync(join(root, f), 'utf8');
      for (const m of text.matchAll(/\]\(([^)#\s]+)(#[^)]*)?\)/g)) {
        const target = m[1]!;
        if (/^(https?:|mailto:|command:)/.test(target)) continue;
        if (!existsSync(join(root, dirname(f), target))) missing.push(`${f} -> ${target}`);
      }
    }
    expect(missing).toEqual([]);
  });
  test('every backticked .md path in docs, comments and tests is a tracked file', () => {
    const missing: string[] = [];
    for (const f of sources) {
      const text = readFileSync(join(root, f), 'utf8');
      for (const m of text.matchAll(/`((?:[\w.-]+\/)*[\w.-]+\.md)`/g)) {
        const p = m[1]!;
        const found = tracked.includes(p) || existsSync(join(root, dirname(f), p));
        if (!found) missing.push(`${f}: ${p}`);
      }
    }
    expect(missing).toEqual([]);
  });
  test('no internal wording or files from outside the repository', () => {
    const bad = /\b(LANGUAGE\.md|REFERENCES\.md|gradcheck\.md)|\.\.\/shared\/|\bthe issue\b|\bissue's\b|minimal contract/;
    const hits = sources.filter((f) => bad.test(readFileSync(join(root, f), 'utf8')));
    expect(hits).toEqual([]);
  });
});
