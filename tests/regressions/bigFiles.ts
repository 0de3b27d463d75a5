// Generated large model files for the pathological and stress suites and the benchmarks'
// TypeScript side: many small LIF-with-synapse cells, 10 lines each, all different names.

/** Neuron blocks (10 lines each) after a timestep line until the file has at least `lines` lines. */
export function generatedFile(lines: number): string {
  const blocks: string[] = ['timestep 0.1 [ms]\n'];
  for (let i = 0; 1 + (blocks.length - 1) * 10 < lines; i++) {
    blocks.push(`neuron Cell${i} "generated cell ${i}" {\n  param tau_m = ${10 + (i % 7)} [ms]\n  param tau_s = 5 [ms]\n  state V = 0\n  state I = 0\n`
      + `  dV/dt = (I - V) / tau_m\n  dI/dt = -I / tau_s\n  fire when V crosses 1 up { V := 0 }\n  incoming w { I := I + w }\n}\n`);
  }
  return blocks.join('');
}
