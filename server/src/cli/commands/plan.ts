// `saltus plan FILE [--model NAME] [--neurons N] [--fan-in K] [--steps T] [--batch B] [--rate R]
// [--float32] [--memory SIZE] [--format text|markdown|json|svg]`: the planner (plan/plan.ts):
// memory kept and operations per training step of BPTT with a surrogate, e-prop and
// EventProp, and the longest sequence each fits in the given memory.
import { analyse } from '../../pipeline';
import { planSvg, planTraining, renderPlan, longestFitting, type PlanShape } from '../../plan/plan';
import { oneOf, parseCommandArgs, UsageError, type Command } from '../command';
import { readSourceFiles } from '../sourceFiles';

const FORMATS = ['text', 'markdown', 'json', 'svg'] as const;
const SIZE_UNITS: Record<string, number> = { b: 1, kb: 1e3, mb: 1e6, gb: 1e9, tb: 1e12, kib: 1024, mib: 1024 ** 2, gib: 1024 ** 3, tib: 1024 ** 4 };

/** '12GB', '12 GB', '16GiB', '500MB' -> bytes. */
export function parseSize(text: string): number | undefined {
  const m = /^\s*(\d+(?:\.\d+)?(?:e[+-]?\d+)?)\s*([kmgt]i?b|b)\s*$/i.exec(text);
  if (!m) return undefined;
  return Number(m[1]) * SIZE_UNITS[m[2]!.toLowerCase()]!;
}

function positive(command: string, name: string, v: unknown, dflt: number, integer: boolean): number {
  if (v === undefined) return dflt;
  const x = Number(v);
  if (!Number.isFinite(x) || x < 0 || (integer && (!Number.isInteger(x) || x < 1))) throw new UsageError(`--${name} takes ${integer ? 'a whole number of at least 1' : 'a number of at least 0'}, not '${String(v)}'`, command);
  return x;
}

export const planCommand: Command = {
  name: 'plan',
  summary: 'memory and operations per training step of BPTT, e-prop and EventProp for a network shape',
  help: `Usage: saltus plan FILE [--model NAME] [--neurons N] [--fan-in K] [--steps T] [--batch B]
                  [--rate R] [--float32] [--memory SIZE] [--format text|markdown|json|svg]

For the trained population of one neuron model, the memory kept for the gradient and the
arithmetic per training step of backpropagation through time with a surrogate (every state
at every step), e-prop (eligibility per synapse, independent of T) and EventProp (the values
recorded per spike, plus trajectories only where the adjoint needs them), and the longest
sequence each fits in the memory given. Operations count the nodes of the derived
expressions (a rule of thumb: one node, one arithmetic operation).

Options:
  --model NAME     the neuron model (default: the first that fires)
  --neurons N      neurons in the population (default 256)
  --fan-in K       incoming synapses per neuron, inputs and recurrent (default 128)
  --steps T        sequence length in grid steps (default 1000)
  --batch B        batch size (default 32)
  --rate R         expected spikes per neuron and step (default 0.02)
  --float32        4-byte values (default: 8-byte float64)
  --memory SIZE    the memory to fit, e.g. 12GB, 16GiB (default 12GB)
  --format text    for people (default); markdown; json; svg (memory against T)
  -h, --help       show this help

Exit status: 0 planned, 1 the model has errors, 2 usage error.`,

  async run(argv, io) {
    const { values, positionals } = parseCommandArgs('plan', argv, {
      model: { type: 'string' }, neurons: { type: 'string' }, 'fan-in': { type: 'string' }, steps: { type: 'string' }, batch: { type: 'string' },
      rate: { type: 'string' }, float32: { type: 'boolean' }, memory: { type: 'string' }, format: { type: 'string' },
    });
    if (values.help) { io.out(planCommand.help + '\n'); return { exitCode: 0 }; }
    const format = oneOf('plan', 'format', values.format as string | undefined, FORMATS, 'text');
    if (positionals.length !== 1) throw new UsageError('give exactly one FILE', 'plan');
    const limit = values.memory === undefined ? 12e9 : parseSize(String(values.memory));
    if (limit === undefined) throw new UsageError(`--memory takes a size like 12GB or 16GiB, not '${String(values.memory)}'`, 'plan');
    const shape: PlanShape = {
      neurons: positive('plan', 'neurons', values.neurons, 256, true), fanIn: positive('plan', 'fan-in', values['fan-in'], 128, true),
      steps: positive('plan', 'steps', values.steps, 1000, true), batch: positive('plan', 'batch', values.batch, 32, true),
      rate: positive('plan', 'rate', values.rate, 0.02, false), bytes: values.float32 ? 4 : 8,
    };
    const [source] = readSourceFiles('plan', positionals, io.cwd);
    const a = analyse(source!.text);
    const model = values.model as string | undefined;
    const n = model === undefined ? a.model.neurons.find((x) => x.fire) ?? a.model.neurons[0] : a.model.neurons.find((x) => x.name === model);
    if (!n) throw new UsageError(model === undefined ? `${source!.path} declares no neuron` : `no neuron named '${model}' in ${source!.path} (it has: ${a.model.neurons.map((x) => x.name).join(', ') || 'none'})`, 'plan', false);
    if (!n.wellFormed) { io.err(`saltus plan: ${n.name} has errors (run 'saltus check ${source!.path}')\n`); return { exitCode: 1 }; }
    const p = planTraining(n, shape);
    if (format === 'json') {
      io.out(JSON.stringify({ ...p, memoryLimit: limit, methods: p.methods.map((m) => ({ ...m, longestFitting: Number.isFinite(longestFitting(m, limit)) ? longestFitting(m, limit) : null })) }, null, 2) + '\n');
    } else if (format === 'svg') io.out(planSvg(n, shape, limit) + '\n');
    else io.out(renderPlan(p, limit, format === 'markdown') + '\n');
    return { exitCode: 0 };
  },
};
