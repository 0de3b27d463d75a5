// Differential test of the incremental re-analysis (server/src/incremental.ts): chains of
// random edits (typing, deleting, pasting, malformed text: braces, quotes, brackets, notes,
// whole lines, neuron and connect keywords) on every sample and on generated 2,000-line files;
// after every edit the incremental analysis must equal a full `analyse` of the same text: the
// diagnostics (messages, ranges, fixes, related places) and what the features read (symbols,
// references, neurons, connections, tokens, syntax items, the effective dt). The seeds are
// fixed, so a failure names the chain and the step to replay.
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { analyse, neuronDerivedDiagnostics, type Analysis } from '../server/src/pipeline';
import { derivedReuseCount, reusedNeuronDerivedDiagnostics } from '../server/src/derivedReuse';
import { analyseIncremental, lastIncrementalPath } from '../server/src/incremental';
import { generatedFile } from './regressions/bigFiles';

const SAMPLES = join(__dirname, '..', 'samples');

/** Mulberry32: a small seeded generator, so that every chain can be replayed. */
function rng(seed: number): () => number {
  let a = seed >>> 0;
  return () => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
}

const SNIPPETS = [' ', 'x', 'V', '1', '0.5', '\n', '  ', '{', '}', '(', ')', '[', ']', '[ms]', '[mV', '"', '"doc"', '#', '#~ a note\n', '# plain\n',
  '+', '-', '*', '/', '^', '=', ':=', ',', 'param a = 2 [ms]\n', 'state Z = 0\n', 'let q = V * 2\n', 'dV/dt = -V / tau\n', 'dQ/dt = 1\n',
  'exp(', 'max(V, 1)', 'fire when V crosses 1 up { V := 0 }\n', 'incoming u { I := I + u }\n', 'neuron', 'neuron Extra { state Y = 0 }\n',
  'connect A -> B\n', 'timestep 0.2 [ms]\n', 'trainable ', '\r\n', 'refractory 2 [ms]\n', '\u00e9', 'tau', 'I', 'crosses', 'up', '5 ms', '\r', '\n\n', '\r\n\r\n'];

/** One random edit of `text`: a replacement of a short range (or an insertion or a deletion). */
function randomEdit(text: string, r: () => number): string {
  const at = Math.floor(r() * (text.length + 1));
  const kind = r();
  const len = kind < 0.4 ? 0 : Math.floor(r() * (kind < 0.8 ? 4 : 40));
  const end = Math.min(text.length, at + len);
  const insert = kind < 0.85 ? SNIPPETS[Math.floor(r() * SNIPPETS.length)]! : kind < 0.95 ? '' : text.slice(Math.floor(r() * text.length)).slice(0, 30);
  return text.slice(0, at) + insert + text.slice(end);
}

/** What the features read besides the diagnostics, in plain data. */
function view(a: Analysis): unknown {
  const m = a.model;
  return {
    symbols: m.symbols.map((s) => [s.kind, s.name, s.neuron, s.nameRange, s.declRange, s.dim, s.unitText, s.doc]),
    references: m.references.map((r) => [r.range, r.target.name, r.target.kind, r.target.neuron]),
    neurons: m.neurons.map((n) => [n.name, n.wellFormed, n.decl.range, n.params.map((p) => [p.name, p.valueSI]), [...n.flows.keys()]]),
    connections: m.connections.map((c) => [c.from, c.to, c.implicit, c.decl?.range]),
    units: m.unitsUsed, timestep: [m.timestepSI, m.timestepDecl?.range, a.timestep],
    exprDims: m.exprDims.size,
    tokens: a.parse.tokens.map((t) => [t.startOffset, t.endOffset, t.image]),
    items: a.parse.file.items.map((i) => [i.kind, i.range]), comments: a.parse.file.comments,
    strayJumps: a.parse.strayJumps.map((j) => j.range), strayNotes: a.parse.strayNotes,
    lines: Array.from({ length: a.lines.lineCount }, (_, i) => [a.lines.lineStart(i), a.lines.lineEnd(i)]),
  };
}

/** Runs `steps` random edits from `start`, comparing each incremental analysis with a full one. */
function chain(start: string, seed: number, steps: number, resetEvery: number): { reused: number } {
  const r = rng(seed);
  let text = start;
  let prev = analyseIncremental(undefined, text);
  let reused = 0;
  for (let i = 0; i < steps; i++) {
    text = i > 0 && i % resetEvery === 0 ? start : randomEdit(text, r);
    const inc = analyseIncremental(prev, text);
    if (lastIncrementalPath === 'reused') reused++;
    const full = analyse(text);
    const where = `seed ${seed}, step ${i}`;
    expect(inc.diagnostics, where).toEqual(full.diagnostics);
    expect(view(inc), where).toEqual(view(full));
    prev = inc;
  }
  return { reused };
}

describe('incremental re-analysis equals a full analysis', () => {
  const samples = readdirSync(SAMPLES).filter((f) => f.endsWith('.saltus')).sort();

  it('on the samples: 3,000 random edits (500 per sample), malformed ones included', () => {
    let reused = 0;
    samples.forEach((f, i) => { reused += chain(readFileSync(join(SAMPLES, f), "utf8"), 1000 + i, 500, 8).reused; });
    // most edits land inside one neuron block and reuse the rest (a test that cannot take the fast path proves nothing)
    expect(reused).toBeGreaterThan(3000 * 0.15);
  }, 600_000);

  it('on generated 2,000-line files: 60 random edits, and 72 edits typed inside one block', () => {
    const big = generatedFile(2000);
    let reused = chain(big, 7, 60, 30).reused;
    // typing inside one cell far down the file, character by character, then deleting it again
    const at = big.indexOf('neuron Cell150');
    const inside = big.indexOf('dI/dt', at);
    let text = big;
    let prev = analyseIncremental(undefined, text);
    const typed = 'let drive = exp(-t / tau_s) * [mV]\n  ';
    for (let i = 1; i <= typed.length * 2; i++) {
      const n = i <= typed.length ? i : typed.length * 2 - i;
      text = big.slice(0, inside) + typed.slice(0, n) + big.slice(inside);
      prev = analyseIncremental(prev, text);
      if (lastIncrementalPath === 'reused') reused++;
      if (i % 8 === 0 || i === typed.length * 2) expect(prev.diagnostics, `typed ${n}`).toEqual(analyse(text).diagnostics);
    }
    expect(prev.diagnostics).toEqual(analyse(big).diagnostics);
    expect(reused).toBeGreaterThan(60 * 0.5);
  }, 600_000);

  it('the slow checks of unchanged neurons, reused across edits, equal fresh ones (800 random edits on the samples and a 30-neuron file, dt from the file and from a setting)', () => {
    const before = { ...derivedReuseCount };
    let oneBlockEdits = 0;
    const files: [string, string][] = [...samples.map((f): [string, string] => [f, readFileSync(join(SAMPLES, f), 'utf8')]), ['generated 300 lines', generatedFile(300)], ['generated 300 lines', generatedFile(300)]];
    files.forEach(([f, start], i) => {
      const r = rng(5000 + i);
      let text = start;
      let prev = analyseIncremental(undefined, text);
      for (let step = 0; step < 100; step++) {
        text = step > 0 && step % 10 === 0 ? start : randomEdit(text, r);
        const options = step % 40 >= 30 ? { timestep: { seconds: 5e-5, source: 'setting' as const, label: '0.05 [ms]' } } : {};
        const inc = analyseIncremental(prev, text, options);
        const path = lastIncrementalPath;
        const full = analyse(text, options);
        const computedBefore = derivedReuseCount.computed;
        inc.model.neurons.forEach((n, k) => {
          if (!n.wellFormed) return;
          expect(reusedNeuronDerivedDiagnostics(inc, n), `${f} step ${step} ${n.name}`).toEqual(neuronDerivedDiagnostics(full, full.model.neurons[k]!));
        });
        // an edit inside one block, at an unchanged dt: only that block's neuron is checked anew
        if (path === 'reused' && step % 40 !== 30 && step % 40 !== 0) {
          expect(derivedReuseCount.computed - computedBefore, `${f} step ${step}`).toBeLessThanOrEqual(1);
          oneBlockEdits++;
        }
        prev = inc;
      }
    });
    // most neurons were handed out again (a test where nothing is reused proves nothing)
    const reused = derivedReuseCount.reused - before.reused, computed = derivedReuseCount.computed - before.computed;
    expect(reused).toBeGreaterThan(0.15 * (reused + computed));
    expect(oneBlockEdits).toBeGreaterThan(100);
  }, 600_000);

  it('falls back to a full analysis where blocks are not independent, with the same result', () => {
    const base = 'timestep 0.1 [ms]\nneuron A {\n  state V = 0 [mV]\n  dV/dt = -V / 1 [ms]\n  fire when V crosses 1 [mV] up { V := 0 [mV] }\n}\n'
      + 'neuron B {\n  state I = 0\n  incoming w { I := I + w }\n}\nconnect A -> B\n';
    const edits: [string, string][] = [
      ['neuron B', 'neuron A'], // a duplicate name
      ['connect A -> B', 'connect A -> C'], // the connection names a missing neuron
      ['state I = 0', 'state I = 0 [s]'], // a unit new to the file
      ['neuron B {', 'neuron B {{'], // braces that do not balance
      ['}\nneuron B', '} neuron B'], // two blocks on one line
    ];
    for (const [from, to] of edits) {
      const prev = analyseIncremental(undefined, base);
      const text = base.replace(from, to);
      expect(analyseIncremental(prev, text).diagnostics, to).toEqual(analyse(text).diagnostics);
    }
  });
});
