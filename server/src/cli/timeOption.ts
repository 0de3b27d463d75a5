// Parses a time given on the command line (e.g. `--timestep 0.05ms`) into seconds, with the
// units layer. Accepted spellings: `0.05 [ms]` (as in a .saltus file), `0.05ms`, `0.05 ms`,
// `5e-5 s`, `50 [us]`; the unit is any unit expression parseUnit reads, of dimension time.
// Invariants: never throws; the result is a positive finite number of seconds or a message
// that says what was wrong and shows an accepted spelling.
import { dimEqual, describeDim, parseUnit, TIME } from '../units';

export type TimeParse = { ok: true; seconds: number } | { ok: false; message: string };

const QUANTITY = /^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(?:\[([^\]]*)\]|([^\[\]]*?))\s*$/;

export function parseTimeOption(text: string): TimeParse {
  const m = QUANTITY.exec(text);
  if (!m) return { ok: false, message: `'${text}' is not a number with a time unit, e.g. 0.1ms or '0.1 [ms]'` };
  const value = Number(m[1]);
  const unitText = (m[2] ?? m[3] ?? '').trim();
  if (unitText === '') return { ok: false, message: `'${text}' has no unit; write the time with one, e.g. ${m[1]}ms` };
  const unit = parseUnit(unitText);
  if (!unit.ok) return { ok: false, message: `'${unitText}' in '${text}': ${unit.message}` };
  if (!dimEqual(unit.dim, TIME)) {
    return { ok: false, message: `'${text}' is not a time (its unit is ${describeDim(unit.dim)}); use e.g. ms or s` };
  }
  const seconds = value * unit.scale;
  if (!Number.isFinite(seconds) || seconds <= 0) return { ok: false, message: `'${text}' must be a positive time` };
  return { ok: true, seconds };
}
