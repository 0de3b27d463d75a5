// The end-to-end runner leaves the work tree clean: by default its screenshots go under
// .e2e/out/ (ignored by git), and the committed ones in docs/screenshots/ are written only
// with --update-screenshots or SALTUS_E2E_UPDATE_SCREENSHOTS=1 (DEVELOPERS.md).
import { execFileSync } from 'node:child_process';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';

const root = join(__dirname, '..');

describe('npm run test:e2e options', () => {
  it('writes screenshots to an ignored folder unless asked to update the committed ones', async () => {
    const run = await import(join(root, 'scripts/e2e/run.mjs')) as {
      parseArgs: (argv: string[], env?: Record<string, string | undefined>) => { screenshots: string };
      COMMITTED_SCREENSHOTS: string; RUN_SCREENSHOTS: string;
    };
    expect(run.COMMITTED_SCREENSHOTS).toBe(join(root, 'docs', 'screenshots'));
    expect(run.parseArgs([], {}).screenshots).toBe(run.RUN_SCREENSHOTS);
    expect(run.parseArgs(['--check', 'hover'], {}).screenshots).toBe(run.RUN_SCREENSHOTS);
    expect(run.parseArgs(['--update-screenshots'], {}).screenshots).toBe(run.COMMITTED_SCREENSHOTS);
    expect(run.parseArgs([], { SALTUS_E2E_UPDATE_SCREENSHOTS: '1' }).screenshots).toBe(run.COMMITTED_SCREENSHOTS);
    expect(() => run.parseArgs(['--screenshot'], {})).toThrow(/unknown option/);
    // the default folder is ignored by git; the committed one is not
    const ignored = (p: string): boolean => {
      try { execFileSync('git', ['check-ignore', '-q', p], { cwd: root }); return true; } catch { return false; }
    };
    expect(ignored(join(run.RUN_SCREENSHOTS, 'hover.png'))).toBe(true);
    expect(ignored(join(run.COMMITTED_SCREENSHOTS, 'hover.png'))).toBe(false);
  });
});
