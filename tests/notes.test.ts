// Documentation notes (`#~`, docs/language.md "Notes"): where a note attaches, what hovers,
// completion and symbols show, the deprecated quoted docstring with its hint and fixes, and the
// rewrite of whole files (`migrateText`, `saltus migrate`): checked on hand-written corner
// cases, on the samples turned back into the old form, and on random placements (fast-check).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { readdirSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { parse } from '../server/src/syntax/parse';
import { documentedDecls } from '../server/src/syntax/notes';
import { migrateText, applyTextEdits } from '../server/src/syntax/migrate';
import { quickFixes } from '../server/src/outputs/codeActions';
import { analyse } from '../server/src/pipeline';
import { hover } from '../server/src/outputs/hover';
import { complete } from '../server/src/outputs/completion';
import { documentSymbols } from '../server/src/outputs/symbols';
import { semanticTokens } from '../server/src/outputs/semanticTokens';
import { fixAll } from '../server/src/outputs/fixAll';
import { formatText } from '../server/src/outputs/format';

const SAMPLES = join(__dirname, '..', 'samples');

/** Each documentable declaration as `kind name: doc`. */
function docs(text: string): string[] {
  return documentedDecls(parse(text).file).map((d) => `${d.kind} ${d.kind === 'incoming' ? d.weight?.name : d.name?.name}: ${d.doc?.text ?? ''}`);
}

const MODEL = `timestep 0.1 [ms]

#~ onset detector for the pump's vibration sensor
#~ (fires on the first knock of a burst)
neuron Onset {
  param tau_m = 20 [ms] trainable  #~ membrane time constant
  #~ adaptation increment
  param b = 0.08
  param theta = 1 "firing threshold (old form)"  #~ scaled
  state V = 0                      #~ membrane potential
  let drive = V / tau_m
  dV/dt = -drive
  fire when V crosses theta up { V := 0 }
  incoming w {  #~ the sensor's synapse
    V := V + w + b
  }
}
`;

describe('where a note attaches', () => {
  it('above (several lines) and at the end of a declaration, merged with an old quoted docstring', () => {
    expect(docs(MODEL)).toEqual([
      "neuron Onset: onset detector for the pump's vibration sensor\n(fires on the first knock of a burst)",
      'param tau_m: membrane time constant',
      'param b: adaptation increment',
      'param theta: firing threshold (old form)\nscaled',
      'state V: membrane potential',
      'let drive: ',
      "incoming w: the sensor's synapse",
    ]);
  });

  it('a blank line, a plain comment or code in between detaches it (stray-note hint); a neuron name or { anchors one', () => {
    const text = `#~ lost: a blank line follows

neuron N {  #~ the neuron
  #~ above a plain comment
  # plain
  param a = 1
  #~ above an equation
  state V = 0
  dV/dt = -V / 1 [ms]  #~ at the end of an equation
}
#~ at the end of the file
`;
    expect(docs(text)).toEqual(['neuron N: the neuron', 'param a: ', 'state V: above an equation']);
    const stray = analyse(text).diagnostics.filter((d) => d.code === 'stray-note').map((d) => text.slice(d.range.start, d.range.end));
    expect(stray).toEqual(['#~ lost: a blank line follows', '#~ above a plain comment', '#~ at the end of an equation', '#~ at the end of the file']);
  });

  it('a note after a member that shares the line of the neuron\'s { goes to the member', () => {
    expect(docs('neuron N { param a = 1  #~ for a\n}\n')).toEqual(['neuron N: ', 'param a: for a']);
  });

  it('hover, completion, the outline and semantic tokens show notes', () => {
    const a = analyse(MODEL);
    expect(a.diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
    const at = (s: string, k = 0): number => MODEL.indexOf(s) + k;
    expect(hover(a, at('tau_m =', 1))?.markdown).toContain('membrane time constant');
    expect(hover(a, at('Onset', 1))?.markdown).toContain('\\(fires on the first knock of a burst\\)');
    expect(hover(a, at('V + w', 4))?.markdown).toContain('the sensor');
    const items = complete(a, at('-drive', 1));
    expect(items.find((c) => c.label === 'drive')).toBeDefined();
    expect(items.find((c) => c.label === 'tau_m')?.documentation).toBe('membrane time constant');
    expect(documentSymbols(a).find((s) => s.name === 'Onset')?.detail).toContain('onset detector');
    const tokens = semanticTokens(a);
    const noteTok = tokens.find((t) => MODEL.slice(t.range.start, t.range.end) === '#~ membrane time constant');
    expect(noteTok).toMatchObject({ type: 'comment', modifiers: ['documentation'] });
    const quoted = tokens.find((t) => MODEL.slice(t.range.start, t.range.end) === '"firing threshold (old form)"');
    expect(quoted).toMatchObject({ type: 'string', modifiers: ['deprecated'] });
  });

  it('formatting keeps notes where they are and lines up the ones at line ends', () => {
    const out = formatText(MODEL)!;
    expect(docs(out)).toEqual(docs(MODEL));
    expect(out).toMatch(/^ {2}state V = 0 +#~ membrane potential$/m);
    expect(out.indexOf('#~ membrane potential') - out.lastIndexOf('\n', out.indexOf('#~ membrane potential'))).toBe(out.indexOf('#~ scaled') - out.lastIndexOf('\n', out.indexOf('#~ scaled')));
  });
});

describe('the old quoted docstrings', () => {
  const OLD = 'timestep 0.1 [ms]\nneuron N "the neuron" {\n  param tau = 5 [ms] "time constant"\n  state V = 0 "potential \\"V\\""\n  dV/dt = -V / tau\n}\n';

  it('read as before, with a deprecated hint each and fixes that rewrite one or all of them', () => {
    const a = analyse(OLD);
    const hints = a.diagnostics.filter((d) => d.code === 'quoted-docstring');
    expect(hints.map((h) => OLD.slice(h.range.start, h.range.end))).toEqual(['"the neuron"', '"time constant"', '"potential \\"V\\""']);
    for (const h of hints) expect(h).toMatchObject({ severity: 'hint', tags: ['deprecated'] });
    expect(docs(OLD)).toEqual(['neuron N: the neuron', 'param tau: time constant', 'state V: potential "V"']);
    // this one
    const one = applyTextEdits(OLD, hints[1]!.fixes![0]!.edits);
    expect(one).toContain('param tau = 5 [ms] #~ time constant\n');
    expect(docs(one)).toEqual(docs(OLD));
    // the neuron's moves above it
    const top = applyTextEdits(OLD, hints[0]!.fixes![0]!.edits);
    expect(top).toContain('#~ the neuron\nneuron N {\n');
    expect(docs(top)).toEqual(docs(OLD));
    // all of them
    // all of them: offered beside each hint by the quick fixes (not carried by every hint: its edits span the file)
    expect(hints[0]!.fixes).toHaveLength(1);
    const offered = quickFixes(a, hints[0]!.range).filter((q) => q.diagnostic === hints[0]);
    expect(offered.map((q) => q.title)).toEqual(['Rewrite as a #~ note', 'Rewrite all 3 quoted docstrings of this file as #~ notes']);
    const all = applyTextEdits(OLD, offered[1]!.fix.edits);
    expect(all).toBe(migrateText(OLD).text);
    expect(analyse(all).diagnostics).toEqual([]);
    expect(docs(all)).toEqual(docs(OLD));
    // Fix All (on save) leaves hints alone: the rewrite is one click, not a surprise
    expect(fixAll(a).edits).toEqual([]);
  });

  it('rewrites the corner cases: code after the docstring, a shared line, a comment after it, an empty one, CRLF', () => {
    const cases = [
      'neuron N "doc" { param a = 1 "for a" param b = 2 "for b" }\n',
      'neuron N {\n  param a = 1 "for a"  # a plain comment\n  param b = 2\n    "on a line of its own"\n}\n',
      'neuron N "" {\n  param a = 1 ""\n}\n',
      'neuron N "doc"\n{\n  state V = 0 "v"\r\n}\r\n',
      '#~ above\nneuron N "and quoted" {  #~ and after\n}\n',
    ];
    for (const text of cases) {
      const m = migrateText(text);
      expect(m.problem, text).toBeUndefined();
      expect(docs(m.text), text).toEqual(docs(text));
      expect(parse(m.text).file.items.every((i) => i.kind !== 'neuron' || (!i.quotedDoc && i.members.every((x) => !('quotedDoc' in x) || !x.quotedDoc))), text).toBe(true);
      expect(migrateText(m.text).rewritten).toBe(0);
    }
  });

  it('the samples written the old way migrate back to their documentation, and the samples need no migration', () => {
    for (const f of readdirSync(SAMPLES).filter((x) => x.endsWith('.saltus'))) {
      const text = readFileSync(join(SAMPLES, f), 'utf8');
      expect(migrateText(text).rewritten, f).toBe(0);
      expect(analyse(text).diagnostics.filter((d) => d.code === 'quoted-docstring' || d.code === 'stray-note'), f).toEqual([]);
      const old = toOldForm(text);
      expect(old, f).not.toBe(text);
      expect(docs(old), f).toEqual(docs(text));
      const m = migrateText(old);
      expect(m.problem, f).toBeUndefined();
      expect(docs(m.text), f).toEqual(docs(text));
    }
  });

  it('property: any docstrings on any declarations migrate to notes that read the same', () => {
    const docText = fc.stringMatching(/^[A-Za-z0-9 ,.()'#~=-]{0,20}$/);
    fc.assert(fc.property(fc.array(fc.tuple(fc.constantFrom('param', 'state', 'let'), docText, fc.constantFrom(' ', '\n    ', '   '), fc.boolean()), { minLength: 1, maxLength: 6 }),
      docText, fc.boolean(), (members, neuronDoc, oneLine) => {
        const q = (s: string): string => `"${s.replace(/["\\]/g, (c) => '\\' + c)}"`;
        const body = members.map(([kind, doc, sep, withDoc], i) => `${kind} x${i}${kind === 'state' ? '' : ' = 1'}${withDoc ? sep + q(doc) : ''}`);
        const text = oneLine ? `neuron N ${q(neuronDoc)} { ${body.join(' ')} }\n` : `neuron N ${q(neuronDoc)} {\n  ${body.join('\n  ')}\n}\n`;
        const m = migrateText(text);
        expect(m.problem).toBeUndefined();
        expect(docs(m.text)).toEqual(docs(text));
      }), { numRuns: 200 });
  });
});

/** The samples' notes written back as quoted docstrings (a neuron's note above it, members' at their line ends). */
function toOldForm(text: string): string {
  const q = (s: string): string => `"${s.replace(/["\\]/g, (c) => '\\' + c)}"`;
  return text
    .replace(/^#~ (.*)\n(neuron \w+) \{/gm, (_m, doc: string, head: string) => `${head} ${q(doc)} {`)
    .replace(/^(\s*(?:param|state|let) [^\n#]*?)(\s+)#~ (.*)$/gm, (_m, code: string, sp: string, doc: string) => `${code}${sp}${q(doc)}`);
}
