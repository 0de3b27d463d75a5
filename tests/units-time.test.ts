// The one time parser (server/src/units/time.ts) behind the CLI's --timestep and the editor's
// saltus.timestep setting: every spelling a modeller types, and one clear message per kind
// of mistake that quotes what was written. Prefix values from the SI Brochure (BIPM 2019,
// 9th ed.): m = 1e-3, u (micro) = 1e-6.
import { describe, expect, test } from 'vitest';
import { parseTime } from '../server/src/units';

const seconds = (text: string): number => {
  const r = parseTime(text);
  if (!r.ok) throw new Error(`parseTime(${JSON.stringify(text)}): ${r.message}`);
  return r.seconds;
};
const message = (text: string): string => {
  const r = parseTime(text);
  if (r.ok) throw new Error(`parseTime(${JSON.stringify(text)}) accepted ${r.seconds} s`);
  return r.message;
};

describe('parseTime: accepted spellings', () => {
  test.each([
    ['0.05 [ms]', 5e-5], // as in a .saltus file
    ['0.05ms', 5e-5],
    ['0.05 ms', 5e-5],
    ['5e-5 s', 5e-5],
    ['5e-5s', 5e-5],
    ['50 [us]', 5e-5],
    ['50 µs', 5e-5],
    ['  0.1 [ ms ]  ', 1e-4],
    ['.5ms', 5e-4],
    ['+2 s', 2],
    ['50 us', 5e-5], // the same double as 0.05 ms (15 significant digits), not 50 * 1e-6
    ['1E-3 [s]', 1e-3],
  ])('%s', (text, expected) => {
    expect(seconds(text)).toBeCloseTo(expected, 15);
    expect(Math.abs(seconds(text) / expected - 1)).toBeLessThan(1e-12);
  });
});

test('equal times spelled differently are the same double', () => {
  const t = seconds('0.05ms');
  for (const s of ['0.05 [ms]', '0.05 ms', '5e-5 s', '50 [us]', '50us', '0.00005 s']) expect(seconds(s), s).toBe(t);
});

describe('parseTime: each mistake gets its own message, quoting what was written', () => {
  test('no unit', () => {
    expect(message('0.1')).toBe("'0.1' has no unit; write the time with one, e.g. 0.1ms or '0.1 [ms]'");
    expect(message('0.05 []')).toMatch(/^'0\.05 \[\]' has empty brackets/);
  });
  test('not a time', () => {
    expect(message('3 [mV]')).toBe("'3 [mV]' is not a time: its unit 'mV' is voltage (V); use a time unit such as ms, us or s");
    expect(message('2 m')).toMatch(/^'2 m' is not a time: its unit 'm' is length/);
  });
  test('not positive', () => {
    expect(message('0 ms')).toMatch(/^'0 ms' is not positive; dt must be a positive time/);
    expect(message('-1ms')).toMatch(/^'-1ms' is not positive/);
  });
  test('not finite', () => {
    expect(message('1e400 ms')).toMatch(/^'1e400 ms' is not finite/);
  });
  test('no number, an unknown unit, a broken bracket, nothing at all', () => {
    expect(message('ms')).toMatch(/^'ms' does not start with a number/);
    expect(message('fast')).toMatch(/^'fast' does not start with a number/);
    expect(message('0.05 [zz]')).toMatch(/^'0\.05 \[zz\]': the unit 'zz' is not understood \(unknown unit 'zz'\)/);
    expect(message('1 [ms')).toMatch(/^'1 \[ms': the unit in brackets is not closed/);
    expect(message('0.1 [ms]\nneuron X {}')).toMatch(/the unit in brackets is not closed, or text follows it/);
    expect(message('')).toMatch(/^no time given/);
    expect(message('   ')).toMatch(/^no time given/);
  });
  test('every message shows an accepted spelling or the unit to use', () => {
    for (const bad of ['0.1', '3 [mV]', '0 ms', '1e400 ms', 'ms', '0.05 [zz]', '1 [ms', '']) {
      expect(message(bad), bad).toMatch(/0\.05ms|0\.1ms|ms, us or s|\[ms\]/);
    }
  });
});
