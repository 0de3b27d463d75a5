// The `saltus.*` settings the server honours, read from the client's configuration:
//   saltus.timestep           a time such as "0.05 [ms]" or "0.05ms" (units/time.ts) overrides
//                             the file's timestep; "" keeps the file's
//   saltus.diagnostics.when   "typing" (default) or "saving"
//   saltus.trace.server       handled by the client; ignored here
// Invariant: readSettings never throws; an invalid timestep is reported in `problems` and
// ignored (the file's own timestep is used).
import type { TimestepOverride } from '../pipeline';
import { parseTime } from '../units/index';

export interface SaltusSettings {
  /** The timestep override, when the setting holds a valid time; analyse() takes it as is. */
  timestep?: TimestepOverride;
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
    const parsed = parseTime(ts);
    if (parsed.ok) out.timestep = { seconds: parsed.seconds, source: 'setting', label: ts.trim() };
    else out.problems.push(`saltus.timestep ignored: ${parsed.message}`);
  } else if (ts !== undefined && typeof ts !== 'string') out.problems.push('saltus.timestep must be a text such as "0.05 [ms]" or "0.05ms"');
  return out;
}

/** The part of the settings an analysis depends on, as a cache key ('' when nothing overrides). */
export function analysisKey(s: SaltusSettings): string {
  return s.timestep ? `${s.timestep.seconds}|${s.timestep.label}` : '';
}
