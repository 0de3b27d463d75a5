// The one parser for a time a modeller types outside a .saltus file: the CLI's `--timestep`
// option and the editor's `saltus.timestep` setting. Accepted spellings: `0.05 [ms]` (as in a
// .saltus file), `0.05ms`, `0.05 ms`, `5e-5 s`, `50 [us]`; the unit is any unit expression
// parseUnit reads (`ms`, `us`, `µs`, `s`, ...) whose dimension is time.
// Invariants: never throws; the result is a positive finite number of seconds (to 15
// significant digits, so equal times spelled differently are equal), or a message
// that quotes what was written, says what is wrong with it, and shows an accepted spelling.
import { dimEqual, TIME } from './dimension';
import { describeDim } from './format';
import { parseUnit } from './unitParse';

export type TimeParse = { ok: true; seconds: number } | { ok: false; message: string };

const NUMBER = /^[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?/;
const EXAMPLE = "e.g. 0.05ms or '0.05 [ms]'";
const MAX_LENGTH = 200;

/** A time with its unit (`0.05 [ms]`, `0.05ms`, `0.05 ms`, `5e-5 s`) in seconds, or why not. */
export function parseTime(text: string): TimeParse {
  const fail = (message: string): TimeParse => ({ ok: false, message });
  if (typeof text !== 'string') return fail(`a time must be written as text, ${EXAMPLE}`);
  if (text.length > MAX_LENGTH) return fail(`'${text.slice(0, 40)}…' is too long for a time; write a number with a unit, ${EXAMPLE}`);
  const shown = `'${text}'`;
  const trimmed = text.trim();
  if (trimmed === '') return fail(`no time given; write a number with a unit, ${EXAMPLE}`);
  const num = NUMBER.exec(trimmed);
  if (!num) return fail(`${shown} does not start with a number; write a number with a time unit, ${EXAMPLE}`);
  const value = Number(num[0]);
  let rest = trimmed.slice(num[0].length).trim();
  if (rest.startsWith('[')) {
    if (!rest.endsWith(']') || rest.indexOf(']') !== rest.length - 1) return fail(`${shown}: the unit in brackets is not closed, or text follows it; write ${EXAMPLE}`);
    rest = rest.slice(1, -1).trim();
    if (rest === '') return fail(`${shown} has empty brackets; write the unit in them, e.g. ${num[0]} [ms]`);
  } else if (/[[\]]/.test(rest)) {
    return fail(`${shown}: a bracket stands where a unit was expected; write ${EXAMPLE}`);
  }
  if (rest === '') return fail(`${shown} has no unit; write the time with one, e.g. ${num[0]}ms or '${num[0]} [ms]'`);
  const unit = parseUnit(rest);
  if (!unit.ok) return fail(`${shown}: the unit '${rest}' is not understood (${unit.message}); write ${EXAMPLE}`);
  if (!dimEqual(unit.dim, TIME)) return fail(`${shown} is not a time: its unit '${rest}' is ${describeDim(unit.dim)}; use a time unit such as ms, us or s`);
  // Rounded to 15 significant digits: the digits a modeller types survive, and the rounding of
  // value x prefix does not (50 us and 0.05 ms are the same double, so every spelling of one
  // time gives the same results, byte for byte).
  const seconds = Number((value * unit.scale).toPrecision(15));
  if (!Number.isFinite(value) || !Number.isFinite(seconds)) return fail(`${shown} is not finite; write a finite time, ${EXAMPLE}`);
  if (seconds <= 0) return fail(`${shown} is not positive; dt must be a positive time, ${EXAMPLE}`);
  return { ok: true, seconds };
}
