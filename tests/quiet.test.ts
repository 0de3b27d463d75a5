// Quiet (refractory) periods, v1 (docs/language.md "Quiet periods"): syntax and recovery,
// resolution, units, diagnostics with their codes, and the step analysis of the quiet mode.
// Sources: the syntax and the corner-case rules are the project's own language reference
// (docs/language.md, v1); the step figures are checked against the closed-form propagator of
// the held flow (dV/dt = 0: P = 1 exactly) and of the unchanged decay (exp(-dt/tau)).
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parse } from '../server/src/syntax/parse';
import { analyseStep } from '../server/src/step/analyse';
import { stepReportJson, stepReportText } from '../server/src/step/report';

export const QUIET_LIF = `timestep 0.1 [ms]
neuron Lif {
  param tau_m = 20 [ms]
  param tau_s = 5 [ms]
  param theta = 1
  param t_ref = 2 [ms] trainable
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  fire when V crosses theta up { V := 0 }
  quiet for t_ref { dV/dt = 0 }
  incoming w { I := I + w }
}
`;
const QUIET_LINE = 'quiet for t_ref { dV/dt = 0 }';
const withQuiet = (line: string): string => QUIET_LIF.replace(QUIET_LINE, line);
const found = (text: string) => analyse(text).diagnostics.filter((d) => d.severity !== 'hint')
  .map((d) => ({ code: d.code, severity: d.severity, at: text.slice(d.range.start, d.range.end), message: d.message }));

describe('syntax: quiet for DURATION { FLOWS }', () => {
  it('parses into a quiet member with its duration, flows and ranges', () => {
    const { file, errors } = parse(QUIET_LIF);
    expect(errors).toEqual([]);
    const n = file.items.find((i) => i.kind === 'neuron')!;
    const q = n.kind === 'neuron' ? n.members.find((m) => m.kind === 'quiet') : undefined;
    expect(q?.kind).toBe('quiet');
    if (q?.kind !== 'quiet') return;
    expect(QUIET_LIF.slice(q.keywordRange.start, q.keywordRange.end)).toBe('quiet');
    expect(QUIET_LIF.slice(q.forRange!.start, q.forRange!.end)).toBe('for');
    expect(QUIET_LIF.slice(q.duration!.range.start, q.duration!.range.end)).toBe('t_ref');
    expect(q.flows.map((f) => QUIET_LIF.slice(f.range.start, f.range.end))).toEqual(['dV/dt = 0']);
    expect(QUIET_LIF.slice(q.range.start, q.range.end)).toBe(QUIET_LINE);
  });

  it('the words stay names elsewhere: a state named quiet, a param named for', () => {
    const text = 'neuron A {\n  param for = 1 [ms]\n  state quiet = 0\n  state V = 0\n  dV/dt = -V / for + quiet / 1 [ms]\n  fire when V crosses 1 up { V := 0  quiet := quiet + 1 }\n  quiet for for { dV/dt = 0 }\n}\n';
    expect(found(text).filter((d) => d.severity === 'error')).toEqual([]);
    expect(analyse(text).model.neurons[0]!.quiet).toBeDefined();
  });

  it('recovers from a broken block: the next member still parses', () => {
    const text = withQuiet('quiet for t_ref { dV/dt = }');
    const a = analyse(text);
    expect(a.diagnostics.filter((d) => d.code === 'syntax-error').length).toBeGreaterThan(0);
    expect(a.model.neurons[0]!.incoming?.weight).toBe('w');
  });
});

describe('resolution, units and diagnostics (codes from server/src/base/diagnostic.ts)', () => {
  it('a clean quiet period: the duration is the parameter, the listed flow replaces dV/dt only', () => {
    expect(found(QUIET_LIF)).toEqual([]);
    const n = analyse(QUIET_LIF).model.neurons[0]!;
    expect(n.wellFormed).toBe(true);
    expect(n.quiet?.duration).toEqual({ k: 'sym', name: 't_ref' });
    expect([...n.quiet!.flows.keys()]).toEqual(['V']);
  });

  const cases: [string, string, { code: string; at: string; message?: RegExp }[]][] = [
    ['a duration without a unit', 'quiet for 2 { dV/dt = 0 }', [{ code: 'unit-mismatch', at: '2', message: /must be a time, e.g. 2 \[ms\]; this one is dimensionless/ }]],
    ['a duration in mV', 'quiet for 2 [mV] { dV/dt = 0 }', [{ code: 'unit-mismatch', at: '2 [mV]' }]],
    ['a negative duration', 'quiet for -1 [ms] { dV/dt = 0 }', [{ code: 'negative-quiet-period', at: '-1 [ms]', message: /lasts -1 ms/ }]],
    ['a duration from a state', 'quiet for V * 1 [ms] { dV/dt = 0 }', [{ code: 'unsupported', at: 'V' }]],
    ['a duration from t', 'quiet for t { dV/dt = 0 }', [{ code: 'unsupported', at: 't' }]],
    ['a flow of an unknown state', 'quiet for t_ref { dX/dt = 0 }', [{ code: 'unknown-name', at: 'X' }]],
    ['a flow of the wrong unit', 'quiet for t_ref { dV/dt = 1 }', [{ code: 'unit-mismatch', at: '1' }]],
    ['a flow given twice', 'quiet for t_ref { dV/dt = 0  dV/dt = 0 }', [{ code: 'duplicate-declaration', at: 'dV/dt' }]],
    ['two quiet periods', 'quiet for t_ref { dV/dt = 0 }\n  quiet for t_ref { }', [{ code: 'duplicate-declaration', at: 'quiet' }]],
  ];
  for (const [name, line, want] of cases) {
    it(name, () => {
      const got = found(withQuiet(line));
      expect(got.map((d) => ({ code: d.code, at: d.at }))).toEqual(want.map((w) => ({ code: w.code, at: w.at })));
      want.forEach((w, i) => { if (w.message) expect(got[i]!.message).toMatch(w.message); });
    });
  }

  it('a quiet period in a neuron that never fires: a warning, nothing starts it', () => {
    const text = 'neuron A {\n  param d = 1 [ms]\n  state V = 0\n  dV/dt = -V / 1 [ms]\n  quiet for d { dV/dt = 0 }\n}\n';
    expect(found(text).map((d) => [d.code, d.severity, d.at])).toEqual([['quiet-without-fire', 'warning', 'quiet']]);
  });

  it('a parameter that divides a quiet flow is checked like one that divides a normal flow', () => {
    const text = withQuiet('quiet for t_ref { dV/dt = -V / tau_q }').replace('param theta = 1', 'param theta = 1\n  param tau_q = 0 [ms]');
    expect(found(text).map((d) => [d.code, d.severity, d.at])).toEqual([['non-positive-constant', 'error', '0 [ms]']]);
  });

  it('a duration of 0 is allowed (no quiet period)', () => {
    expect(found(withQuiet('quiet for 0 [ms] { dV/dt = 0 }'))).toEqual([]);
  });

  it('fired-side-after-quiet: a quiet flow that drives V past theta by the end (V = 0 + 1/ms * 2 ms = 2 > 1) is a warning', async () => {
    const { derivedDiagnostics } = await import('../server/src/pipeline');
    const derived = (text: string) => derivedDiagnostics(analyse(text)).filter((d) => d.severity !== 'info')
      .map((d) => [d.code, d.severity, text.slice(d.range.start, d.range.end)]);
    expect(derived(withQuiet('quiet for t_ref { dV/dt = 1 / 1 [ms] }'))).toEqual([['fired-side-after-quiet', 'warning', 'quiet']]);
    // 0.4 / ms for 2 ms ends at 0.8 < theta: nothing to say; a held V ends at its reset: nothing
    expect(derived(withQuiet('quiet for t_ref { dV/dt = 0.4 / 1 [ms] }'))).toEqual([]);
    expect(derived(QUIET_LIF)).toEqual([]);
  });

  it('the quiet mode adds no second copy of a derived diagnostic (each issue once)', async () => {
    const { derivedDiagnostics } = await import('../server/src/pipeline');
    const text = withQuiet('quiet for t_ref { dV/dt = 0 }').replace('incoming w { I := I + w }', 'incoming w { I := I + w / (2 + V) }');
    const ds = derivedDiagnostics(analyse(text)).map((d) => `${d.code}@${d.range.start}`);
    expect(ds.length).toBeGreaterThan(0);
    expect(new Set(ds).size).toBe(ds.length);
  });

  it('refractory says to write quiet for', () => {
    const got = found(withQuiet('refractory 2 [ms]'));
    expect(got.map((d) => d.code)).toEqual(['unsupported']);
    expect(got[0]!.message).toMatch(/quiet for DURATION/);
  });
});

describe('step analysis reports the quiet mode', () => {
  const n = analyse(QUIET_LIF).model.neurons[0]!;
  const r = analyseStep(n, 1e-4);
  it('the quiet mode holds V exactly (P_VV = 1) while I keeps its decay exp(-dt/tau_s)', () => {
    expect(r.quiet).toBeDefined();
    const P = r.quiet!.exactPropagator!;
    const iV = P.states.indexOf('V'), iI = P.states.indexOf('I');
    expect(P.matrix[iV]![iV]).toBe(1);
    expect(P.matrix[iV]![iI]).toBe(0);
    expect(P.matrix[iI]![iI]).toBeCloseTo(Math.exp(-0.1 / 5), 14);
    expect(r.quiet!.crossing).toBeNull(); // no threshold in the quiet mode
    // the normal mode is unchanged: exp(-dt/tau_m) on the diagonal
    expect(r.exactPropagator!.matrix[r.exactPropagator!.states.indexOf('V')]![r.exactPropagator!.states.indexOf('V')]).toBeCloseTo(Math.exp(-0.1 / 20), 14);
  });
  it('the text and the JSON say so', () => {
    expect(stepReportText([r])).toMatch(/Lif in its quiet period/);
    const j = stepReportJson([r]).models[0]!;
    expect(j.quiet?.exactPropagator?.[0]?.[0]).toBe(1);
    expect(stepReportJson([analyseStep(analyse(QUIET_LIF.replace(QUIET_LINE, '')).model.neurons[0]!, 1e-4)]).models[0]!.quiet).toBeUndefined();
  });
});

describe('editor: hover, completion, formatting, semantic tokens, folding (docs/language.md "Quiet periods")', async () => {
  const { hover } = await import('../server/src/outputs/hover');
  const { complete } = await import('../server/src/outputs/completion');
  const { formatText } = await import('../server/src/outputs/format');
  const { semanticTokens } = await import('../server/src/outputs/semanticTokens');
  const { foldingRanges } = await import('../server/src/outputs/folding');
  const a = analyse(QUIET_LIF);
  const at = (needle: string, k = 0): number => QUIET_LIF.indexOf(needle) + k;

  it('hover on quiet and on for explains the construct; on the duration, the parameter', () => {
    expect(hover(a, at('quiet for') + 1)?.markdown).toMatch(/^\*\*quiet\*\* — A quiet \(refractory\) period/);
    expect(hover(a, at('quiet for') + 7)?.markdown).toMatch(/^\*\*for\*\* — Part of `quiet for DURATION/);
    expect(hover(a, at('quiet for t_ref') + 11)?.markdown).toMatch(/t_ref/);
    // the quiet flow: its own equation, said to be the quiet period's, with both sides' units
    const q = hover(a, at('{ dV/dt = 0 }') + 3)?.markdown ?? '';
    expect(q).toMatch(/dV\/dt = 0/);
    expect(q).toMatch(/\*\*flow\*\* of state `V` of `Lif` in its quiet period/);
    expect(hover(a, at('dV/dt = (I - V)') + 1)?.markdown).not.toMatch(/quiet period/);
    // a state named quiet is a state, not the keyword
    const text = 'neuron A {\n  state quiet = 0\n  dquiet/dt = 0\n}\n';
    expect(hover(analyse(text), text.indexOf('quiet') + 1)?.markdown).not.toMatch(/refractory/);
  });

  it('completion offers quiet among the members (a snippet), parameters for the duration, flows inside', () => {
    const body = QUIET_LIF.replace(QUIET_LINE, 'qu');
    const c = complete(analyse(body), body.indexOf('qu\n') + 2);
    expect(c.find((x) => x.label === 'quiet')?.snippet).toMatch(/^quiet for \$\{1:t_ref\} \{/);
    const dur = QUIET_LIF.replace(QUIET_LINE, 'quiet for ');
    const d = complete(analyse(dur), dur.indexOf('quiet for ') + 10);
    expect(d.map((x) => x.label).sort()).toEqual(['t_ref', 'tau_m', 'tau_s', 'theta']);
    const inside = QUIET_LIF.replace(QUIET_LINE, 'quiet for t_ref {\n    \n  }');
    const f = complete(analyse(inside), inside.indexOf('t_ref {\n') + 12);
    expect(f.map((x) => x.label)).toEqual(['dV/dt', 'dI/dt']);
  });

  it('formatting: a one-flow quiet period stays on one line, a longer one is laid out; formatting again changes nothing', () => {
    expect(formatText(QUIET_LIF)).toBe(QUIET_LIF);
    const messy = QUIET_LIF.replace(QUIET_LINE, 'quiet   for   2*t_ref {\n dV/dt = 0\n dI/dt=0 [1/s] }');
    const once = formatText(messy)!;
    expect(once).toContain('  quiet for 2 * t_ref {\n    dV/dt = 0\n    dI/dt = 0 [1/s]\n  }\n');
    expect(formatText(once)).toBe(once);
  });

  it('semantic tokens: quiet and for are keywords there, the duration a parameter, dV/dt a variable', () => {
    const toks = semanticTokens(a);
    const of = (start: number) => toks.find((t) => t.range.start === start)?.type;
    expect(of(at('quiet for'))).toBe('keyword');
    expect(of(at('quiet for') + 6)).toBe('keyword');
    expect(of(at('quiet for t_ref') + 10)).toBe('parameter');
    expect(of(at('{ dV/dt = 0 }') + 2)).toBe('variable');
  });

  it('folding: a quiet period over several lines folds', () => {
    const text = QUIET_LIF.replace(QUIET_LINE, 'quiet for t_ref {\n    dV/dt = 0\n  }');
    const line = text.slice(0, text.indexOf('quiet for')).split('\n').length - 1;
    expect(foldingRanges(analyse(text)).some((f) => f.startLine === line && f.endLine === line + 1)).toBe(true);
  });
});
