import { test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { key } from '../server/src/symbolic/normalise';
import { readFileSync } from 'node:fs';
test('x', () => {
  const src = readFileSync('/work/shared/LANGUAGE.md','utf8').split('```')[1]!;
  const a = analyse(src);
  console.log(a.diagnostics);
  for (const n of a.model.neurons) { console.log(n.name, n.wellFormed, [...n.flows].map(([k,v])=>k+': '+key(v)), n.fire && key(n.fire.guard), n.params.map(p=>[p.name,p.valueSI,p.trainable]), n.states);
  if (n.incoming) console.log([...n.incoming.jumps].map(([k,v])=>k+':'+key(v))); }
  console.log(a.model.connections);
});
