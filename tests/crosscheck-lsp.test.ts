// The gradient cross-check as the editor runs it: over JSON-RPC the result must survive
// serialisation (plain data) and still render the report page; cancelling stops it.
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { crossCheckHtml, runCrossCheck } from '../server/src/crosscheck/index';
import { root } from './helpers/cli';

test('the result is plain JSON data and renders after a round trip', async () => {
  const a = analyse(readFileSync(join(root, 'samples/lif_current.saltus'), 'utf8'));
  const scenario = JSON.parse(readFileSync(join(root, 'samples/scenarios/lif_current.json'), 'utf8'));
  const progress: number[] = [];
  const r = await runCrossCheck(a, scenario, { onProgress: (p) => progress.push(p.done) });
  expect(r.passed).toBe(true);
  const copy = JSON.parse(JSON.stringify(r));
  expect(copy.gradients.length).toBe(r.gradients.length);
  const html = crossCheckHtml(copy, { cspSource: 'vscode-resource:', nonce: 'n0nce' });
  expect(html).toContain('<svg');
  expect(html).not.toMatch(/<script/i);
  expect(progress.length).toBeGreaterThan(3);
});

test('cancelling stops the check between simulations', async () => {
  const a = analyse(readFileSync(join(root, 'samples/adex.saltus'), 'utf8'));
  const scenario = JSON.parse(readFileSync(join(root, 'samples/scenarios/adex.json'), 'utf8'));
  let n = 0;
  const signal = { get aborted() { return n >= 2; } };
  const r = await runCrossCheck(a, scenario, { signal, onProgress: () => { n++; } });
  expect(r.passed).toBe(false);
  expect(n).toBeLessThan(5);
});
