// The published JSON Schema of the scenario file (schemas/scenario.schema.json, registered
// with the editor through `jsonValidation` for completion and squiggles) as the validator's
// source of the field names each object may hold: one list, so the schema and the messages
// of scenario.ts cannot drift apart. The validator checks the rest itself (names against
// the model file, sizes, times before the duration), with messages naming the JSON path.
import schema from '../../../schemas/scenario.schema.json';

interface Props { properties: Record<string, unknown> }
const keys = (o: Props): readonly string[] => Object.keys(o.properties);
const defs = schema.definitions;

export const SCENARIO_FIELDS = {
  root: keys(schema),
  input: keys(defs.population.oneOf[0]!),
  model: keys(defs.population.oneOf[1]!),
  projection: keys(defs.projection),
  sample: keys(schema.properties.sample),
  stateIntegralLoss: keys(defs.loss.oneOf[0]!),
  spikeTimeLoss: keys(defs.loss.oneOf[1]!),
} as const;
