// The `saltus.*` settings the server honours, read from the client's configuration:
//   saltus.timestep           "0.05 [ms]" overrides the file's timestep; "" keeps the file's
//   saltus.diagnostics.when   "typing" (default) or "saving"
//   saltus.trace.server       handled by the client; ignored here
// Invariant: readSettings never throws; an invalid timestep is reported in `problems` and
// ignored (the file's own timestep is used).
import { analyse } from '../pipeline';

export interface SaltusSettings {
  /** Timestep override in seconds, when the setting holds a valid time. */
  timestepSI?: number;
  diagnosticsWhen: 'typing' | 'saving';
  /** Why a setting was ignored, for the log. */
  problems: string[];
}

export const DEFAULT_SETTINGS: SaltusSettings = { diagnosticsWhen: 'typing', problems: [] };

/** Reads the `saltus` section ({ timestep, diagnostics: { when } }) as the client sends it. */
export function readSettings(raw: unknown): SaltusSettings {
  const out: SaltusSettings = { diagnosticsWhen: 'typing', problems: [] };
  if (typeof raw !== 'object' || raw === null) return out;
  const section = raw as { timestep?: unknown; diagnostics?: { when?: unknown } };
  const when = section.diagnostics?.when;
  if (when === 'saving' || when === 'typing') out.diagnosticsWhen = when;
  else if (when !== undefined) out.problems.push(`saltus.diagnostics.when must be "typing" or "saving", not ${JSON.stringify(when)}`);
  const ts = section.timestep;
  if (typeof ts === 'string' && ts.trim() !== '') {
    const parsed = parseTimestep(ts);
    if (typeof parsed === 'number') out.timestepSI = parsed;
    else out.problems.push(`saltus.timestep ignored: ${parsed.error}`);
  } else if (ts !== undefined && typeof ts !== 'string') out.problems.push('saltus.timestep must be a text such as "0.05 [ms]"');
  return out;
}

/** A time quantity such as "0.05 [ms]", read with the language's own parser and unit checks. */
export function parseTimestep(text: string): number | { error: string } {
  if (/[\r\n#{}"]/.test(text)) return { error: `'${text}' is not a quantity such as 0.05 [ms]` };
  const a = analyse(`timestep ${text}`);
  const problem = a.diagnostics.find((d) => d.severity === 'error');
  if (problem) return { error: problem.message };
  if (a.model.timestepSI === undefined) return { error: `'${text}' is not a positive time such as 0.05 [ms]` };
  return a.model.timestepSI;
}
