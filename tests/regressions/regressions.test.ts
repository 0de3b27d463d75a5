// Runs every saved failing case (tests/regressions/*.saltus) through the whole-pipeline check
// (pipelineCheck.ts). Cases come from `npm run fuzz` (fuzzRun.ts saves them) or are written by
// hand for a fixed bug. Header lines steer extra checks:
//   # expect: code, code     these diagnostic codes must be reported
//   # wellformed: N          exactly N neurons are well-formed (analysed further)
//   # selfcheck              every well-formed neuron passes the adjoint self-check
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { analyse, derivedDiagnostics } from '../../server/src/pipeline';
import { derivationFor } from '../../server/src/adjoint/index';
import { checkPipeline } from './pipelineCheck';
import { adjointSelfCheck } from './adjointSelfCheck';

const CASES = readdirSync(__dirname).filter((f) => f.endsWith('.saltus')).sort();

describe('saved regression cases', () => {
  it('there are cases to run', () => { expect(CASES.length).toBeGreaterThan(0); });
  it.each(CASES)('%s', (file) => {
    const text = readFileSync(join(__dirname, file), 'utf8');
    const header = (key: string): string | undefined => new RegExp(`^# ${key}:?(.*)$`, 'm').exec(text)?.[1]?.trim();
    const r = checkPipeline(text, { budgetMs: 30_000, probes: 6, step: true, codegen: ['c', 'numpy'] });
    const a = analyse(text);
    const codes = new Set([...a.diagnostics, ...derivedDiagnostics(a)].map((d) => d.code));
    for (const c of (header('expect') ?? '').split(',').map((x) => x.trim()).filter(Boolean)) expect([...codes], `${file} should report ${c}`).toContain(c);
    const wf = header('wellformed');
    if (wf !== undefined) expect(r.wellFormed).toBe(Number(wf));
    if (header('selfcheck') !== undefined) {
      for (const n of a.model.neurons.filter((x) => x.wellFormed)) adjointSelfCheck(n, derivationFor(n, { params: 'all' }), 7, 3);
    }
  }, 60_000);
});
