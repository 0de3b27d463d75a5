// The published JSON Schema of the scenario file (schemas/scenario.schema.json): it accepts
// every shipped scenario and the quantity form, rejects what the validator rejects for its
// shape, and is registered with the editor. The schema is checked with Ajv (an independent,
// general-purpose JSON Schema validator, draft-07), the validator is server/src/crosscheck.
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import Ajv from 'ajv';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { parseScenario } from '../server/src/crosscheck';
import { SCENARIO_FIELDS } from '../server/src/crosscheck/scenarioSchema';

const root = join(__dirname, '..');
const schema = JSON.parse(readFileSync(join(root, 'schemas', 'scenario.schema.json'), 'utf8'));
const ajv = new Ajv({ allErrors: true });
ajv.addKeyword('defaultSnippets'); // VS Code's completion hint, not a validation keyword
const validate = ajv.compile(schema);

const scenarioFiles = (): string[] => {
  const dir = join(root, 'samples', 'scenarios');
  const top = readdirSync(dir).filter((f) => f.endsWith('.json')).map((f) => join(dir, f));
  const wide = readdirSync(join(dir, 'wide')).filter((f) => f.endsWith('.json')).map((f) => join(dir, 'wide', f));
  return [...top, ...wide];
};
const LIF = analyse(readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8'));
const base = (): Record<string, any> => JSON.parse(readFileSync(join(root, 'samples', 'scenarios', 'lif_current.json'), 'utf8'));

describe('the scenario schema', () => {
  test('every shipped scenario is valid under it', () => {
    const files = scenarioFiles();
    expect(files.length).toBeGreaterThanOrEqual(6);
    for (const f of files) expect(validate(JSON.parse(readFileSync(f, 'utf8'))), `${f}: ${ajv.errorsText(validate.errors)}`).toBe(true);
  });
  test('quantities with units are valid in every value position, and so is a $schema field', () => {
    const s = base();
    s.$schema = '../../schemas/scenario.schema.json';
    s.duration_s = '50 [ms]';
    s.projections[0].weights[0][0] = '1.2 [1]';
    const input = Object.values(s.populations).find((p: any) => 'spikes' in p) as any;
    input.spikes[0][0] = '1.2 [ms]';
    expect(validate(s), ajv.errorsText(validate.errors)).toBe(true);
    expect(parseScenario(s, LIF).ok).toBe(true);
  });
  const broken: [string, (s: Record<string, any>) => void][] = [
    ['a unit without brackets', (s) => { s.duration_s = '50 ms'; }],
    ['an unknown field', (s) => { s.durations = 1; }],
    ['no loss', (s) => { delete s.loss; }],
    ['an unknown loss kind', (s) => { s.loss.kind = 'mean-rate'; }],
    ['a population with both spikes and model', (s) => { const [k] = Object.keys(s.populations); s.populations[k!].model = 'LifCurrent'; }],
    ['a size above 64', (s) => { const k = Object.keys(s.populations).find((n) => 'model' in s.populations[n])!; s.populations[k].size = 65; }],
    ['a weight that is text', (s) => { s.projections[0].weights[0][0] = 'heavy'; }],
  ];
  test.each(broken)('%s: the schema and the validator both reject it', (_name, change) => {
    const s = base();
    change(s);
    expect(validate(s)).toBe(false);
    expect(parseScenario(s, LIF).ok).toBe(false);
  });
  test('the validator reads its field names from the schema', () => {
    expect(SCENARIO_FIELDS.root).toEqual(Object.keys(schema.properties));
    expect([...SCENARIO_FIELDS.model].sort()).toEqual(['initial', 'model', 'params', 'scales', 'size']);
    expect(SCENARIO_FIELDS.spikeTimeLoss).toContain('targets_s');
  });
  test('the editor validates scenario files with it (jsonValidation), and the package ships it', () => {
    const pkg = JSON.parse(readFileSync(join(root, 'package.json'), 'utf8'));
    const jv = pkg.contributes.jsonValidation as { fileMatch: string[]; url: string }[];
    expect(jv).toHaveLength(1);
    expect(jv[0]!.url).toBe('./schemas/scenario.schema.json');
    expect(jv[0]!.fileMatch).toContain('**/scenarios/*.json');
    expect(readFileSync(join(root, '.vscodeignore'), 'utf8')).toMatch(/^!schemas\/scenario\.schema\.json$/m);
  });
});
