import { test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { deriveNeuron } from '../server/src/adjoint/derive';
import { toMathjs } from '../server/src/symbolic/print';
import { readFileSync } from 'node:fs';
const P = (s: any) => s ? toMathjs(s) : String(s);
test('x', () => {
  const src = readFileSync('/work/shared/LANGUAGE.md','utf8').split('```')[1]!;
  const a = analyse(src);
  for (const n of a.model.neurons) {
    const d = deriveNeuron(n, { params: 'all' });
    console.log(n.name, d.millis.toFixed(2), 'ms');
    for (const [x, e] of d.adjointFlow) console.log('  dl' + x, P(e));
    if (d.spike) { console.log('  gdot', P(d.spike.gdot), '| raw', P(d.spike.gdotRaw)); console.log('  phi', P(d.spike.phi)); for (const [x, e] of d.spike.jump) console.log('  jump', x, P(e)); console.log('  record', d.spike.record); }
    if (d.incoming) { console.log('  coupling', P(d.incoming.coupling), 'wg', P(d.incoming.weightGradient)); for (const [x, e] of d.incoming.jump) console.log('  injump', x, P(e)); }
    for (const [p, g] of d.paramGradients) console.log('  grad', p, P(g.flow), '|', P(g.spike), '|', P(g.incoming));
    console.log(d.trajectory, d.notes, d.issues.map(i => i.message));
  }
});
