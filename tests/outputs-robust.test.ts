// Every editor feature on arbitrary, mostly broken text (property-based, fast-check): no
// provider throws, every range lies inside the text, formatting either refuses or keeps
// the tokens, and rename edits are distinct.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { hover } from '../server/src/outputs/hover';
import { complete } from '../server/src/outputs/completion';
import { definition, highlights, references } from '../server/src/outputs/navigation';
import { prepareRename, rename, isRefusal } from '../server/src/outputs/rename';
import { encodeSemanticTokens, semanticTokens } from '../server/src/outputs/semanticTokens';
import { foldingRanges } from '../server/src/outputs/folding';
import { formatText } from '../server/src/outputs/format';
import { quickFixes } from '../server/src/outputs/codeActions';
import { inlayHints } from '../server/src/outputs/inlayHints';
import { documentSymbols } from '../server/src/outputs/symbols';
import type { Range } from '../server/src/syntax/ast';

const FRAGMENTS = [
  'neuron ', 'N ', 'M ', '{', '}', '\n', ' ', 'param ', 'state ', 'let ', 'fire when ', ' crosses ', ' up ', 'incoming ', 'connect ', ' -> ',
  'timestep ', 'V', 'I', 'w', 'tau', ' = ', ' := ', '1', '2.5', '[ms]', '[mV/ms]', '[', ']', '(', ')', ' + ', ' - ', ' * ', ' / ', '^', ',',
  'exp(', 'max(', 't', 'dV/dt', 'dI/dt', '"doc τ 🐝"', '# comment Δ 🎯\n', 'trainable', '"', '#', 'λ', '🐝',
];

const inside = (r: Range, n: number): boolean => r.start >= 0 && r.start <= r.end && r.end <= n;

describe('providers on arbitrary text', () => {
  it('never throw and keep every range inside the text', () => {
    fc.assert(fc.property(fc.array(fc.constantFrom(...FRAGMENTS), { maxLength: 40 }), fc.nat(), (parts, seed) => {
      const text = parts.join('');
      const a = analyse(text);
      const n = text.length;
      const offsets = [0, n, seed % (n + 1), (seed * 7) % (n + 1), (seed * 13) % (n + 1)];
      for (const o of offsets) {
        const h = hover(a, o);
        if (h) expect(inside(h.range, n)).toBe(true);
        for (const c of complete(a, o)) expect(inside(c.replace, n)).toBe(true);
        const d = definition(a, o);
        if (d) expect(inside(d, n)).toBe(true);
        for (const r of references(a, o, true)) expect(inside(r, n)).toBe(true);
        for (const h2 of highlights(a, o)) expect(inside(h2.range, n)).toBe(true);
        const p = prepareRename(a, o);
        if (!isRefusal(p)) {
          const r = rename(a, o, 'renamed_x');
          if (!isRefusal(r)) {
            const keys = r.edits.map((e) => `${e.range.start}:${e.range.end}`);
            expect(new Set(keys).size).toBe(keys.length);
          }
        }
        for (const q of quickFixes(a, { start: o, end: o })) for (const e of q.fix.edits) expect(inside(e.range, n)).toBe(true);
      }
      const data = encodeSemanticTokens(a, semanticTokens(a));
      expect(data.length % 5).toBe(0);
      for (const f of foldingRanges(a)) expect(f.startLine).toBeLessThan(f.endLine);
      for (const h of inlayHints(a)) expect(h.offset).toBeLessThanOrEqual(n);
      for (const s of documentSymbols(a)) expect(inside(s.range, n) && inside(s.selectionRange, n)).toBe(true);
      const f = formatText(text);
      if (f !== undefined) expect(formatText(f)).toBe(f);
    }), { numRuns: 300 });
  });
});
