// A network description for generated code (--network NET.json): the cross-check scenario
// format (docs/crosscheck.md), read for its structure: which model each population uses. The
// generated runner reads the file again at run time for weights, inputs and the loss.
// The runner reads SI numbers only: a quantity with a unit ("2 [nS]"), which the cross-check
// accepts, is refused here with its path and the SI number to write.
// Transmission delays: every runner (NumPy, PyTorch, C, CUDA) reads a projection's `delay_s`;
// without one it takes the model file's `connect A -> B [via W] delay D` between the two
// populations' models into that block (`fileDelays`, baked into the generated runner), the rule
// of the cross-check (crosscheck/scenario.ts): a description's `delay_s` overrides the file's.
// Invariant: `readNetworkSpec` never throws; problems name the JSON field.
import { readQuantity } from '../crosscheck/quantity';

export interface NetworkSpec {
  /** Model names the populations use, in file order. */
  models: string[];
  /** The parsed description (handed to the runner's tests and docs as it is). */
  json: unknown;
  /** The model file's delays, which a runner applies to a projection without its own `delay_s`. */
  fileDelays: FileDelay[];
}

/** A `connect from -> to [via] delay D` of the model file: models by declared name, the receiving
 *  block by its weight name (the first block's when the connection names none), D in seconds. */
export interface FileDelay { from: string; to: string; via: string; delay: number }

type Obj = Record<string, unknown>;
const isObj = (v: unknown): v is Obj => typeof v === 'object' && v !== null && !Array.isArray(v);

export function readNetworkSpec(json: unknown, modelNames: readonly string[], fileDelays: readonly FileDelay[] = []): { spec?: NetworkSpec; errors: string[] } {
  const errors: string[] = [];
  if (!isObj(json)) return { errors: ['the network description must be a JSON object with populations, projections and loss'] };
  const pops = json.populations;
  if (!isObj(pops)) return { errors: ['populations: must be an object of named populations'] };
  const models: string[] = [];
  for (const [name, p] of Object.entries(pops)) {
    if (!isObj(p)) { errors.push(`populations.${name}: must be an object`); continue; }
    if (p.model === undefined) continue;
    if (typeof p.model !== 'string' || !modelNames.includes(p.model)) {
      errors.push(`populations.${name}.model: no model named ${JSON.stringify(p.model)} in the file (it declares ${modelNames.join(', ')})`);
    } else if (!models.includes(p.model)) models.push(p.model);
  }
  if (!Array.isArray(json.projections)) errors.push('projections: must be a list');
  if (!isObj(json.loss)) errors.push('loss: must be an object');
  if (models.length === 0 && errors.length === 0) errors.push('populations: no population uses a model of the file');
  errors.push(...quantityStrings(json).slice(0, 5));
  return errors.length ? { errors } : { spec: { models, json, fileDelays: [...fileDelays] }, errors };
}

/** Fields whose string values are names or text, not values. */
const TEXT_FIELDS = new Set(['$schema', 'description', 'model', 'from', 'to', 'via', 'kind', 'population', 'state']);

/** Values written as quantities ("2 [nS]"): the generated runner reads SI numbers only. */
function quantityStrings(v: unknown, path = '', out: string[] = []): string[] {
  if (typeof v === 'string') {
    const r = readQuantity(v, { what: path });
    out.push(`${path}: the generated runner reads SI numbers only; write ${r?.ok ? `${Number(r.si.toPrecision(12))} instead of "${v}"` : `an SI number instead of "${v}"`}`);
  } else if (Array.isArray(v)) v.forEach((x, k) => quantityStrings(x, `${path}[${k}]`, out));
  else if (isObj(v)) {
    for (const [k, x] of Object.entries(v)) if (!TEXT_FIELDS.has(k)) quantityStrings(x, path ? `${path}.${k}` : k, out);
  }
  return out;
}
