// A network description for generated code (--network NET.json): the cross-check scenario
// format (docs/crosscheck.md), read for its structure: which model each population uses. The
// generated runner reads the file again at run time for weights, inputs and the loss.
// Invariant: `readNetworkSpec` never throws; problems name the JSON field.

export interface NetworkSpec {
  /** Model names the populations use, in file order. */
  models: string[];
  /** The parsed description (handed to the runner's tests and docs as it is). */
  json: unknown;
}

type Obj = Record<string, unknown>;
const isObj = (v: unknown): v is Obj => typeof v === 'object' && v !== null && !Array.isArray(v);

export function readNetworkSpec(json: unknown, modelNames: readonly string[]): { spec?: NetworkSpec; errors: string[] } {
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
  return errors.length ? { errors } : { spec: { models, json }, errors };
}
