// `saltus adjoint`: the JSON contract of docs/adjoint.md for every sample (every EXPR is
// mathjs-readable text whose free symbols are the documented ones), the other formats,
// the standalone HTML page, and usage errors.
import { mkdtempSync, readFileSync, readdirSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { parse as mathParse, type MathNode } from 'mathjs';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { root, runCli } from './helpers/cli';

const SAMPLES = readdirSync(join(root, 'samples')).filter((f) => f.endsWith('.saltus') && f !== 'mistakes.saltus');

function freeNames(text: string): string[] {
  const out = new Set<string>();
  mathParse(text).traverse((n: MathNode, _path: string, parent: MathNode | null) => {
    if (n.type === 'SymbolNode' && !(parent?.type === 'FunctionNode' && (parent as unknown as { fn: MathNode }).fn === n)) out.add((n as unknown as { name: string }).name);
  });
  return [...out];
}

describe('saltus adjoint --format json follows the contract', () => {
  test.each(SAMPLES)('%s', (file) => {
    const r = runCli(['adjoint', `samples/${file}`, '--format', 'json']);
    expect(r.code).toBe(0);
    const json = JSON.parse(r.stdout) as { models: { name: string; states: string[]; adjointFlow: Record<string, string>; spike: null | Record<string, unknown>;
      incoming: null | Record<string, unknown>; paramGradients: Record<string, Record<string, string | null>> }[] };
    const model = analyse(readFileSync(join(root, 'samples', file), 'utf8')).model;
    expect(json.models.map((m) => m.name)).toEqual(model.neurons.map((n) => n.name));
    for (const m of json.models) {
      const n = model.neurons.find((x) => x.name === m.name)!;
      expect(m.states).toEqual(n.states.map((s) => s.name));
      const allowed = new Set([...n.states.map((s) => s.name), ...n.params.map((p) => p.name), 't', 'phi', 'coupling', 'dlp_dt', 'lV_pre', 'lV_post',
        ...n.states.flatMap((s) => [`lambda_${s.name}`, `dlV_d${s.name}`]), ...(n.incoming ? [n.incoming.weight] : [])]);
      const exprs: string[] = [...Object.values(m.adjointFlow)];
      expect(Object.keys(m.adjointFlow)).toEqual(m.states);
      if (n.fire) {
        const s = m.spike as { gdot: string; phi: string; jump: Record<string, string>; record: string[]; eventBased: boolean };
        exprs.push(s.gdot, s.phi, ...Object.values(s.jump));
        expect(typeof s.eventBased).toBe('boolean');
        for (const x of s.record) expect(m.states).toContain(x);
      } else expect(m.spike).toBeNull();
      if (n.incoming) {
        const i = m.incoming as { weight: string; jump: Record<string, string>; weightGradient: string; coupling: string };
        expect(i.weight).toBe(n.incoming.weight);
        exprs.push(i.weightGradient, i.coupling, ...Object.values(i.jump));
      } else expect(m.incoming).toBeNull();
      for (const g of Object.values(m.paramGradients)) for (const e of Object.values(g)) if (e !== null) exprs.push(e);
      expect(Object.keys(m.paramGradients).sort()).toEqual(n.params.filter((p) => p.trainable).map((p) => p.name).sort());
      for (const e of exprs) {
        expect(e).toMatch(/\S/); // a non-empty expression text (a number, null or '' fails here)
        for (const name of freeNames(e)) expect(allowed, `${m.name}: '${name}' in ${e}`).toContain(name);
      }
    }
  });
});

describe('other faces of saltus adjoint', () => {
  test('text, markdown and latex formats', () => {
    const t = runCli(['adjoint', 'samples/lif_current.saltus']);
    expect(t.stdout).toContain('dlambda_V/dt = lambda_V / tau_m - dlV_dV');
    expect(runCli(['adjoint', 'samples/lif_current.saltus', '--format', 'markdown']).stdout).toContain('### Adjoint system of');
    expect(runCli(['adjoint', 'samples/lif_current.saltus', '--format', 'latex']).stdout).toContain('\\begin{aligned}');
  });
  test('--model picks one neuron; an unknown one is a usage error naming the choices', () => {
    const one = JSON.parse(runCli(['adjoint', 'samples/lif_current.saltus', '--model', 'Readout', '--format', 'json']).stdout);
    expect(one.models.map((m: { name: string }) => m.name)).toEqual(['Readout']);
    const bad = runCli(['adjoint', 'samples/lif_current.saltus', '--model', 'Nope']);
    expect(bad.code).toBe(2);
    expect(bad.stderr).toMatch(/no neuron named 'Nope'.*it has: LifCurrent, Readout/);
  });
  test('a file with errors: the neurons with errors are skipped with a message, exit 1', () => {
    const r = runCli(['adjoint', 'samples/mistakes.saltus', '--format', 'json']);
    expect(r.code).toBe(1);
    expect(r.stderr).toMatch(/has errors and is not derived/);
    expect(JSON.parse(r.stdout).models).toEqual([]);
  });
  test('--html writes the typeset page with its stylesheet and fonts beside it', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-adjoint-'));
    const r = runCli(['adjoint', 'samples/adex.saltus', '--html', join(dir, 'adex.html')]);
    expect(r.code).toBe(0);
    const html = readFileSync(join(dir, 'adex.html'), 'utf8');
    expect(html).toContain('class="katex"');
    expect(html).toContain("script-src 'none'");
    expect(html).not.toMatch(/<script/i);
    expect(existsSync(join(dir, 'katex', 'katex.min.css'))).toBe(true);
    expect(readdirSync(join(dir, 'katex', 'fonts')).length).toBeGreaterThan(10);
  });
});
