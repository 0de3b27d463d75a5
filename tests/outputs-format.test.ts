// The formatter (outputs/format.ts): exact canonical layout on hand-written cases, and on
// every model (samples/*.saltus when present, plus inline ones) the two invariants:
// idempotence and an unchanged token/comment sequence, also under random whitespace.
import { readdirSync, readFileSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { parse } from '../server/src/syntax/parse';
import { formatEdits, formatText } from '../server/src/outputs/format';
import { applyEdits } from '../server/src/outputs/codeActions';

const LANGUAGE_EXAMPLE = `# Leaky integrate-and-fire with an exponentially decaying synaptic current.
# Membrane variable scaled so that the threshold is 1 (dimensionless).

timestep 0.1 [ms]

neuron LifCurrent "LIF with exponential current synapse" {
  param tau_m = 20 [ms]   "membrane time constant"
  param tau_s = 5 [ms]    "synaptic time constant"
  param theta = 1         "firing threshold"

  state V = 0             "membrane potential (scaled)"
  state I = 0             "synaptic current (scaled)"

  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s

  fire when V crosses theta up {
    V := 0
  }

  incoming w {
    I := I + w
  }
}

neuron Readout "non-spiking leaky integrator output" {
  param tau_m = 20 [ms]
  param tau_s = 5 [ms]
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / tau_s
  incoming w { I := I + w }
}

connect LifCurrent -> LifCurrent   # recurrent projection
connect LifCurrent -> Readout
`;

const samplesDir = join(__dirname, '..', 'samples');
const SAMPLES: [string, string][] = existsSync(samplesDir)
  ? readdirSync(samplesDir).filter((f) => f.endsWith('.saltus')).map((f) => [f, readFileSync(join(samplesDir, f), 'utf8')])
  : [];
const MODELS: [string, string][] = [['language example', LANGUAGE_EXAMPLE], ...SAMPLES];

/** The token sequence (unit texts trimmed, as the formatter is allowed to) and the comments. */
function lexed(text: string): { tokens: string[]; comments: string[] } {
  const p = parse(text);
  return {
    tokens: p.tokens.map((t) => `${t.tokenType.name}:${t.tokenType.name === 'UnitBody' ? t.image.trim() : t.image}`).filter((s) => s !== 'UnitBody:'),
    comments: p.file.comments.map((c) => c.text),
  };
}

describe('canonical layout', () => {
  it('spaces, indents, breaks declarations onto lines, keeps comments and a one-line block', () => {
    const messy = [
      '# header   comment',
      'timestep   0.1[ms]',
      'neuron   Lif"doc"{param tau=20[ms]trainable"t c"   # trailing',
      ' state V[mV]=-65[ mV ]',
      '',
      '',
      '  # own-line comment',
      '   dV/dt=(-(V-(-65[mV]))/tau)*2^-1+max(V,-V)',
      '  fire when V crosses-50[mV]up{V:=-65[mV]}',
      '  incoming w[mV]{',
      'V:=V+w',
      '',
      '  }',
      '}',
      'connect Lif->Lif',
    ].join('\n');
    expect(formatText(messy)).toBe([
      '# header   comment',
      'timestep 0.1 [ms]',
      'neuron Lif "doc" {',
      '  param tau = 20 [ms] trainable "t c"  # trailing',
      '  state V [mV] = -65 [mV]',
      '',
      '  # own-line comment',
      '  dV/dt = (-(V - (-65 [mV])) / tau) * 2^-1 + max(V, -V)',
      '  fire when V crosses -50 [mV] up { V := -65 [mV] }',
      '  incoming w [mV] {',
      '    V := V + w',
      '  }',
      '}',
      'connect Lif -> Lif',
      '',
    ].join('\n'));
  });

  it('puts several declarations of one line on their own lines and expands multi-jump blocks', () => {
    expect(formatText('neuron N { param a = 1 param b = 2 state V = 0 fire when V crosses a up { V := 0 V := b } }')).toBe(
      'neuron N {\n  param a = 1\n  param b = 2\n  state V = 0\n  fire when V crosses a up {\n    V := 0\n    V := b\n  }\n}\n');
  });

  it('keeps a line break inside a statement, with a 4-space continuation indent', () => {
    const src = 'neuron N {\n  param a = 1\n  let x = a +\n  a * 2   # second\n  let y = a\n  # mid\n  + a\n}\n';
    expect(formatText(src)).toBe('neuron N {\n  param a = 1\n  let x = a +\n      a * 2  # second\n  let y = a\n      # mid\n      + a\n}\n');
  });

  it('drops blank lines after { and before }, keeps at most one elsewhere, no trailing spaces', () => {
    const src = '\n\n\nneuron N {\n\n\n  param a = 1   \n\n\n\n  param b = 2\n\n}\n\n\n\nconnect N -> N\n\n';
    expect(formatText(src)).toBe('neuron N {\n  param a = 1\n\n  param b = 2\n}\n\nconnect N -> N\n');
  });

  it('lines up the docstrings of consecutive declarations, and consecutive trailing comments', () => {
    const src = [
      'neuron N {',
      '  param tau_m = 20 [ms] "membrane"',
      '  param a = 1 "gain"',
      '  param b = 2',
      '  param c = 3 "alone" # note',
      '  state V = 0 # x',
      '  state long_name = 0 "doc 🐝"  # y',
      '}',
      'connect N -> N # first',
      'connect N -> N  # second',
    ].join('\n');
    expect(formatText(src)).toBe([
      'neuron N {',
      '  param tau_m = 20 [ms] "membrane"',
      '  param a = 1           "gain"',
      '  param b = 2',
      '  param c = 3 "alone"          # note',
      '  state V = 0                  # x',
      '  state long_name = 0 "doc 🐝"  # y',
      '}',
      'connect N -> N  # first',
      'connect N -> N  # second',
      '',
    ].join('\n'));
  });

  it('writes an empty block as {}', () => {
    expect(formatText('neuron N {\n}\n')).toBe('neuron N {}\n');
  });

  it('keeps comments and docstrings with Greek letters and emoji exactly, and CRLF line ends', () => {
    const src = '# Δt 🐝  sensor\r\nneuron Bee   "τ = 5 ms 🎯 \\"quoted\\"" {\r\n  param tau=5[ms]  #  λ  ω 🐝\r\n}\r\n';
    expect(formatText(src)).toBe('# Δt 🐝  sensor\r\nneuron Bee "τ = 5 ms 🎯 \\"quoted\\"" {\r\n  param tau = 5 [ms]  #  λ  ω 🐝\r\n}\r\n');
  });

  it('refuses text with syntax errors, so nothing is lost', () => {
    expect(formatText('neuron N { param = }')).toBeUndefined();
    expect(formatText('neuron N { param a = 1 [ms }')).toBeUndefined();
    expect(formatText('neuron N { state V = 0 $ }')).toBeUndefined();
    expect(formatEdits('neuron N {')).toBeUndefined();
  });

  it('formats an empty file to nothing and a comment-only file to its comments', () => {
    expect(formatText('')).toBe('');
    expect(formatText('  \n\n')).toBe('');
    expect(formatText('   # only\n\n\n# two')).toBe('# only\n\n# two\n');
  });

  it('gives a minimal edit that produces the formatted text, and none when already formatted', () => {
    const src = 'neuron N {\n  param a=1\n  state V = 0  # 🐝\n}\n';
    const edits = formatEdits(src)!;
    expect(edits).toHaveLength(1);
    expect(src.slice(edits[0]!.range.start, edits[0]!.range.end)).toBe('=');
    expect(applyEdits(src, edits)).toBe(formatText(src));
    expect(formatEdits(formatText(src)!)).toEqual([]);
  });
});

describe.each(MODELS)('invariants on %s', (_name, text) => {
  it('is idempotent and keeps the token and comment sequence', () => {
    const once = formatText(text);
    if (parse(text).errors.length > 0) { expect(once).toBeUndefined(); return; }
    expect(once).toBeDefined();
    expect(formatText(once!)).toBe(once);
    expect(lexed(once!)).toEqual(lexed(text));
  });

  it('gives the same result under random whitespace between tokens (property)', () => {
    if (parse(text).errors.length > 0) return;
    const p = parse(text);
    const items = [...p.tokens.map((t) => ({ start: t.startOffset, type: t.tokenType.name })), ...p.file.comments.map((c) => ({ start: c.range.start, type: 'Comment' }))]
      .sort((x, y) => x.start - y.start);
    // Insertion points: before an item, except inside brackets (a line break there ends the unit).
    const points = items.filter((it, i) => i > 0 && !['LBracket', 'UnitBody'].includes(items[i - 1]!.type) && it.type !== 'RBracket').map((it) => it.start);
    fc.assert(fc.property(
      fc.array(fc.tuple(fc.nat({ max: Math.max(0, points.length - 1) }), fc.constantFrom(' ', '   ', '\t', '\n', '\n\n\n')), { maxLength: 12 }),
      (inserts) => {
        const edits = inserts.map(([i, ws]) => ({ range: { start: points[i]!, end: points[i]! }, newText: ws }));
        const noisy = applyEdits(text, edits);
        const f = formatText(noisy);
        expect(f).toBeDefined();
        expect(formatText(f!)).toBe(f);
        expect(lexed(f!)).toEqual(lexed(text));
      }), { numRuns: 60 });
  });
});
