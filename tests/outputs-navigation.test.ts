// Definition, references, highlights (outputs/navigation.ts) and rename (outputs/rename.ts):
// expected ranges are written into the text with «...» markers.
import { describe, expect, it } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { definition, highlights, references } from '../server/src/outputs/navigation';
import { isRefusal, prepareRename, rename } from '../server/src/outputs/rename';
import { applyEdits } from '../server/src/outputs/codeActions';
import { cursor, marked, slices } from './helpers/cursor';

const LIF = `timestep 0.1 [ms]
neuron Lif {
  param tau_m = 20 [ms]
  param theta = 1
  state V = 0
  state I = 0
  dV/dt = (I - V) / tau_m
  dI/dt = -I / (5 [ms])
  fire when V crosses theta up { V := 0 }
  incoming w { I := I + w }
}
neuron Out {
  state V = 0
  dV/dt = -V / (10 [ms])
  incoming w { V := V + w }
}
connect Lif -> Lif
connect Lif -> Out
`;

/** Puts the cursor at `anchor` + `k` characters. */
const at = (anchor: string, k = 0, text = LIF): number => {
  const i = text.indexOf(anchor);
  if (i < 0) throw new Error(anchor);
  return i + k;
};

describe('definition', () => {
  it('jumps from a use to the declared name', () => {
    const m = marked(LIF.replace('param tau_m', 'param «tau_m»'));
    const a = analyse(m.text);
    const r = definition(a, at('/ tau_m', 3, m.text))!;
    expect(r).toEqual(m.ranges[0]);
  });

  it('from the X of dX/dt and from connect names', () => {
    const a = analyse(LIF);
    expect(LIF.slice(definition(a, at('dI/dt', 1))!.start, definition(a, at('dI/dt', 1))!.end)).toBe('I');
    expect(definition(a, at('dI/dt', 1))!.start).toBe(at('state I', 6));
    expect(definition(a, at('-> Out', 3))!.start).toBe(at('neuron Out', 7));
  });

  it('is nothing on keywords, numbers, units and comments', () => {
    const a = analyse(LIF);
    expect(definition(a, at('param', 1))).toBeUndefined();
    expect(definition(a, at('20 [ms]', 0))).toBeUndefined();
    expect(definition(a, at('[ms]', 1))).toBeUndefined();
  });
});

describe('references and highlights', () => {
  const src = `neuron Lif {
  param tau_m = 20 [ms]
  state «V» = 0
  d«V»/dt = -«V» / tau_m
  fire when «V» crosses 1 up { «V» := 0 }
}
neuron Out {
  state V = 0
  dV/dt = -V / (10 [ms])
}
`;
  it('finds every use in the neuron (dX/dt and jump targets too), declaration first, not the other neuron', () => {
    const m = marked(src);
    const a = analyse(m.text);
    const refs = references(a, m.ranges[2]!.start, true);
    expect(refs).toEqual(m.ranges);
    expect(references(a, m.ranges[2]!.start, false)).toEqual(m.ranges.slice(1));
  });

  it('marks the declaration, dX/dt and jump targets as writes', () => {
    const m = marked(src);
    const a = analyse(m.text);
    const hs = highlights(a, m.ranges[0]!.start);
    expect(hs.map((h) => h.kind)).toEqual(['write', 'write', 'read', 'read', 'write']);
  });

  it('finds a neuron in connect lines', () => {
    const a = analyse(LIF);
    const refs = references(a, at('neuron Lif', 8), true);
    expect(slices(LIF, refs)).toEqual(['Lif', 'Lif', 'Lif', 'Lif']);
  });
});

describe('rename', () => {
  it('renames a state everywhere, turning dV/dt into dU/dt, only in its neuron', () => {
    const a = analyse(LIF);
    const r = rename(a, at('state V', 6), 'U');
    if (isRefusal(r)) throw new Error(r.error);
    const out = applyEdits(LIF, r.edits);
    expect(out).toContain('state U = 0\n  state I = 0\n  dU/dt = (I - U) / tau_m');
    expect(out).toContain('fire when U crosses theta up { U := 0 }');
    expect(out).toContain('neuron Out {\n  state V = 0\n  dV/dt = -V / (10 [ms])');
    expect(analyse(out).diagnostics).toEqual(analyse(LIF).diagnostics);
  });

  it('renames a neuron with its connect lines', () => {
    const r = rename(analyse(LIF), at('-> Out', 4), 'Readout');
    if (isRefusal(r)) throw new Error(r.error);
    const out = applyEdits(LIF, r.edits);
    expect(out).toContain('neuron Readout {');
    expect(out).toContain('connect Lif -> Readout');
    expect(analyse(out).diagnostics.filter((d) => d.severity === 'error')).toEqual([]);
  });

  it('renames the incoming weight in its block only', () => {
    const r = rename(analyse(LIF), at('I + w', 4), 'weight');
    if (isRefusal(r)) throw new Error(r.error);
    const out = applyEdits(LIF, r.edits);
    expect(out).toContain('incoming weight { I := I + weight }');
    expect(out).toContain('incoming w { V := V + w }');
  });

  it('prepareRename gives the name range and placeholder', () => {
    const p = prepareRename(analyse(LIF), at('/ tau_m', 4));
    expect(p).toEqual({ range: { start: at('/ tau_m', 2), end: at('/ tau_m', 7) }, placeholder: 'tau_m' });
  });

  it('refuses keywords, t, units, numbers and function names, with a message', () => {
    const text = 'neuron N { param a = 2 [ms] state V = 0 dV/dt = exp(-t / a) / a }';
    const a = analyse(text);
    const refusal = (offset: number): string => { const p = prepareRename(a, offset); return isRefusal(p) ? p.error : 'accepted'; };
    expect(refusal(text.indexOf('param') + 1)).toMatch(/keyword/);
    expect(refusal(text.indexOf('-t') + 1)).toMatch(/time/);
    expect(refusal(text.indexOf('ms]'))).toMatch(/units/);
    expect(refusal(text.indexOf('2 ['))).toMatch(/numbers/);
    expect(refusal(text.indexOf('exp'))).toMatch(/built-in function/);
  });

  it('validates the new name', () => {
    const a = analyse(LIF);
    const errorFor = (name: string): string => { const r = rename(a, at('param tau_m', 7), name); return isRefusal(r) ? r.error : 'accepted'; };
    expect(errorFor('2tau')).toMatch(/not a name/);
    expect(errorFor('crosses')).toMatch(/keyword/);
    expect(errorFor('lambda_V')).toMatch(/reserved/);
    expect(errorFor('sigmoid')).toMatch(/reserved/);
    expect(errorFor('theta')).toMatch(/already declared in Lif as a param/);
    expect(errorFor('w')).toMatch(/already declared in Lif as a weight/);
    expect(errorFor('tau_mem')).toBe('accepted');
    const n = rename(a, at('neuron Out', 8), 'Lif');
    expect(isRefusal(n) && n.error).toMatch(/already declared/);
  });
});

describe('test helper: cursor and range markers', () => {
  it('strips ‸ / $0 and «» and reports UTF-16 offsets', () => {
    expect(cursor('a🐝b‸c')).toEqual({ text: 'a🐝bc', offset: 4 });
    expect(cursor('x$0y')).toEqual({ text: 'xy', offset: 1 });
    const m = marked('«ab» c «d»');
    expect(m).toEqual({ text: 'ab c d', offset: -1, ranges: [{ start: 0, end: 2 }, { start: 5, end: 6 }] });
    expect(() => cursor('no marker')).toThrow();
    expect(() => marked('«open')).toThrow();
  });
});
