import { test } from 'vitest';
import { simulate } from '../server/src/simulate';
import { fdCases } from './helpers/fdCases';
test('x', () => {
  const c = fdCases()[3]!.c;
  for (const T of [0.002, 0.005, 0.01, 0.02]) {
  const tr = simulate(c.net, T, c.inputs, { rtol: 1e-10, loss: c.loss });
  console.log(T, tr.errors, tr.steps, tr.rejected, tr.spikes, tr.final, tr.events.map(e => [e.kind, e.time, Array.from(e.pre).map(x=>x.toExponential(3)).join(',')]));
  }
});
