// `saltus step` and the step analysis in the editor faces: the JSON contract of
// docs/step-analysis.md, the exit status for an unstable step, the dt override (--timestep,
// alias --dt), the hovers on `timestep` and on an equation, and the one effective dt
// (Analysis.timestep) that diagnostics, hovers and generated code all read.
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse, derivedDiagnostics } from '../server/src/pipeline';
import { hover } from '../server/src/outputs/hover';
import { DERIVED_SECTIONS } from '../server/src/outputs/derivedHover';
import { generateFiles } from '../server/src/codegen/index';
import { root, runCli } from './helpers/cli';

describe('saltus step', () => {
  test('JSON has exactly the documented keys, in SI seconds', () => {
    const r = runCli(['step', 'samples/adex.saltus', '--format', 'json']);
    expect(r.code).toBe(0);
    const m = JSON.parse(r.stdout).models[0];
    expect(Object.keys(m).sort()).toEqual(['dt_s', 'exactPropagator', 'exactRadius', 'map', 'maxStableDt_s', 'name', 'reference', 'relativeStepError', 'stepRadius', 'states', 'substeps'].sort());
    expect(m.dt_s).toBeCloseTo(1e-4, 15);
    expect(m.reference).toBe('rest');
    expect(m.states.V.scheme).toBe('exponential-rk4');
    expect(m.map).toBe('exponential-rk4');
    expect(m.substeps).toBe(8);
    expect(m.exactPropagator).toBeNull();
  });
  // An undamped oscillator x' = v, v' = -w2 x: the couplings form a cycle, so the step map is
  // ETDRK4 with a = 0, which is the classical RK4; its stability interval on the imaginary axis
  // ends at 2 sqrt(2) (Hairer & Wanner; from memory), so with w2 = 1/ms^2 it is unstable above
  // 2 sqrt(2) ms = 2.828 ms (tests/step-analyse.test.ts checks the same bound).
  const OSC = (dt: string) => `timestep ${dt}\nneuron Osc { param w2 = 1 [1/ms^2]\n state x = 1 [mV]\n state v = 0 [mV/ms]\n dx/dt = v\n dv/dt = -w2 * x }\n`;
  test('an unstable step is an error on the timestep, with the largest stable dt', () => {
    const text = OSC('3 [ms]');
    const unstable = derivedDiagnostics(analyse(text)).find((d) => d.code === 'step-unstable');
    expect(unstable?.severity).toBe('error');
    expect(text.slice(unstable!.range.start, unstable!.range.end)).toBe('3 [ms]');
    expect(unstable!.message).toMatch(/stable for dt up to 2\.828 ms/);
    expect(derivedDiagnostics(analyse(OSC('0.5 [ms]'))).some((d) => d.code === 'step-unstable')).toBe(false);
  });
  test('--dt (alias of --timestep) overrides the file, and a file without timestep needs one', () => {
    const a = JSON.parse(runCli(['step', 'samples/lif_current.saltus', '--dt', '0.5ms', '--format', 'json']).stdout);
    expect(a.models[0].dt_s).toBeCloseTo(5e-4, 15);
    // Rotter & Diesmann 1999: P_II = exp(-h/tau_s) for the synaptic current (tau_s = 5 ms in the sample).
    expect(a.models[0].exactPropagator[1][1]).toBeCloseTo(Math.exp(-0.5 / 5), 12);
    const bad = runCli(['step', 'samples/lif_current.saltus', '--dt', '3 [mV]']);
    expect(bad.code).toBe(2);
  });
  test('--dt is an alias of --timestep: the same output, byte for byte, for every spelling of the time', () => {
    for (const format of ['text', 'json']) {
      const viaDt = runCli(['step', 'samples/lif_current.saltus', '--dt', '0.05ms', '--format', format]);
      expect(viaDt.code).toBe(0);
      expect(viaDt.stdout).toContain(format === 'text' ? '(dt = 0.05 ms)' : '"dt_s": 0.00005');
      for (const spelling of ['0.05 [ms]', '0.05 ms', '5e-5 s', '50 [us]']) {
        const r = runCli(['step', 'samples/lif_current.saltus', '--timestep', spelling, '--format', format]);
        expect({ code: r.code, stdout: r.stdout, stderr: r.stderr }, spelling).toEqual({ code: viaDt.code, stdout: viaDt.stdout, stderr: viaDt.stderr });
      }
    }
  });
});

describe('step analysis in hovers', () => {
  const text = readFileSync(join(root, 'samples', 'izhikevich.saltus'), 'utf8');
  const a = analyse(text);
  test('on timestep: every neuron', () => {
    const h = hover(a, text.indexOf('timestep') + 2, DERIVED_SECTIONS)!;
    expect(h.markdown).toContain('Izhikevich');
    expect(h.markdown).toMatch(/spectral radius|stable/i);
  });
  test('on an equation: its scheme in the step map', () => {
    const h = hover(a, text.indexOf('dv/dt') + 1, DERIVED_SECTIONS)!;
    expect(h.markdown).toContain('**Step of `v`** in `Izhikevich`: `exponential-rk4`');
    expect(h.markdown).toMatch(/linear part a = d f\/d v/);
  });
});

describe('one dt: Analysis.timestep, read by every consumer', () => {
  // The undamped oscillator above: its step map (RK4 here) is unstable above dt = 2 sqrt(2) ms.
  const OSC = (dt: string) => `${dt ? `timestep ${dt}\n` : ''}neuron Osc { param w2 = 1 [1/ms^2]\n state x = 1 [mV]\n state v = 0 [mV/ms]\n dx/dt = v\n dv/dt = -w2 * x }\n`;
  const slice = (text: string, r: { start: number; end: number } | undefined) => (r ? text.slice(r.start, r.end) : undefined);

  test('the file\'s timestep, with the range of its value; none without one', () => {
    const text = OSC('0.5 [ms]');
    const a = analyse(text);
    expect(a.timestep).toMatchObject({ seconds: 5e-4, source: 'file', label: '0.5 [ms]' });
    expect(slice(text, a.timestep!.range)).toBe('0.5 [ms]');
    expect(analyse(OSC('')).timestep).toBeUndefined();
    expect(analyse(OSC('0.5 [mV]')).timestep).toBeUndefined(); // not a time: a unit-mismatch error, no dt
  });

  test('an override replaces the file\'s value; an unusable one is ignored', () => {
    const a = analyse(OSC('0.5 [ms]'), { timestep: { seconds: 3e-3, source: 'setting', label: '3ms' } });
    expect(a.timestep).toEqual({ seconds: 3e-3, source: 'setting', label: '3ms' });
    expect(analyse(OSC(''), { timestep: { seconds: 2e-3, source: 'option', label: '2 ms' } }).timestep).toEqual({ seconds: 2e-3, source: 'option', label: '2 ms' });
    for (const seconds of [0, -1, NaN, Infinity]) {
      expect(analyse(OSC('0.5 [ms]'), { timestep: { seconds, source: 'option', label: 'x' } }).timestep?.source, String(seconds)).toBe('file');
    }
  });

  test('step-unstable sits on the file\'s value for its own dt, on the neuron name (saying where the dt came from) for an override', () => {
    const own = OSC('3 [ms]');
    const fromFile = derivedDiagnostics(analyse(own)).find((d) => d.code === 'step-unstable')!;
    expect(slice(own, fromFile.range)).toBe('3 [ms]');
    expect(fromFile.message).not.toMatch(/This dt comes from/);

    const text = OSC('0.5 [ms]');
    const setting = derivedDiagnostics(analyse(text, { timestep: { seconds: 3e-3, source: 'setting', label: '3ms' } })).find((d) => d.code === 'step-unstable')!;
    expect(slice(text, setting.range)).toBe('Osc');
    expect(setting.message).toMatch(/unstable at dt = 3 ms/);
    expect(setting.message).toMatch(/This dt comes from the saltus\.timestep setting \('3ms'\), which overrides the file's 'timestep 0\.5 \[ms\]'\.$/);

    const bare = OSC('');
    const option = derivedDiagnostics(analyse(bare, { timestep: { seconds: 3e-3, source: 'option', label: '3 [ms]' } })).find((d) => d.code === 'step-unstable')!;
    expect(slice(bare, option.range)).toBe('Osc');
    expect(option.message).toMatch(/This dt comes from the --timestep option \('3 \[ms\]'\)\.$/);
    expect(derivedDiagnostics(analyse(bare)).some((d) => d.code === 'step-unstable')).toBe(false); // no dt, no step analysis
  });

  test('step-inaccurate judges the map generated code runs (the exact LIF map at 1 ms: none) and sits where the dt came from', () => {
    const lif = readFileSync(join(root, 'samples', 'lif_current.saltus'), 'utf8');
    const opt = { timestep: { seconds: 1e-3, source: 'option' as const, label: '1ms' } };
    expect(derivedDiagnostics(analyse(lif, opt)).filter((d) => d.code.startsWith('step-'))).toEqual([]);
    const text = OSC('0.5 [ms]');
    expect(derivedDiagnostics(analyse(text)).filter((d) => d.code.startsWith('step-'))).toEqual([]);
    const inexact = derivedDiagnostics(analyse(text, { timestep: { seconds: 2e-3, source: 'option', label: '2ms' } })).find((d) => d.code === 'step-inaccurate')!;
    expect(slice(text, inexact.range)).toBe('Osc');
    expect(inexact.message).toMatch(/^Osc: at dt = 2 ms one step of the map that generated code takes, fourth-order exponential Runge-Kutta \(ETDRK4\), one step per dt, differs from the exact linearised flow by/);
    expect(inexact.message).toMatch(/This dt comes from the --timestep option \('2ms'\), which overrides the file's 'timestep 0\.5 \[ms\]'\.$/);
    const own = OSC('2 [ms]');
    const onFile = derivedDiagnostics(analyse(own)).find((d) => d.code === 'step-inaccurate')!;
    expect(slice(own, onFile.range)).toBe('2 [ms]');
  });

  test('the hovers on timestep and on an equation, and generated code, use the override', () => {
    const text = OSC('0.5 [ms]');
    const a = analyse(text, { timestep: { seconds: 3e-3, source: 'setting', label: '3ms' } });
    const onTimestep = hover(a, text.indexOf('timestep') + 2, DERIVED_SECTIONS)!.markdown;
    expect(onTimestep).toContain('**Step analysis of `Osc`** at dt = 3 ms');
    expect(onTimestep).toContain("dt = 3 ms, from the saltus\\.timestep setting \\('3ms'\\); it overrides the file's `timestep 0.5 [ms]`");
    const onEquation = hover(a, text.indexOf('dv/dt') + 1, DERIVED_SECTIONS)!.markdown;
    expect(onEquation).toContain('UNSTABLE at dt = 3 ms');
    expect(hover(analyse(text), text.indexOf('dv/dt') + 1, DERIVED_SECTIONS)!.markdown).toContain("dt = 0.5 ms, from the file's timestep \\(0\\.5 \\[ms\\]\\)");
    const header = (x: ReturnType<typeof analyse>) => generateFiles(x, { target: 'c' }).files.find((f) => f.name.endsWith('.h'))!.content;
    expect(header(a)).toContain('analysis ran at dt = 3 ms;');
    expect(header(analyse(text))).toContain('analysis ran at dt = 0.5 ms;');
  });

  test('saltus generate and check take the dt the same way (--timestep, or its alias --dt)', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-dt-'));
    try {
      writeFileSync(join(dir, 'osc.saltus'), OSC('0.5 [ms]'));
      for (const [flag, out] of [['--timestep', 'a'], ['--dt', 'b']] as const) {
        const r = runCli(['generate', 'osc.saltus', '--target', 'c', '--out', out, flag, '3 [ms]'], dir);
        expect(r.code, r.stderr).toBe(0);
      }
      expect(readFileSync(join(dir, 'a', 'Osc.h'), 'utf8')).toContain('analysis ran at dt = 3 ms;');
      expect(readFileSync(join(dir, 'b', 'Osc.h'), 'utf8')).toBe(readFileSync(join(dir, 'a', 'Osc.h'), 'utf8'));
      const check = runCli(['check', 'osc.saltus', '--dt', '3ms'], dir);
      expect(check.code).toBe(1);
      expect(check.stdout).toContain("This dt comes from the --timestep option ('3ms'), which overrides the file's 'timestep 0.5 [ms]'.");
      expect(check.stdout).toMatch(/^osc\.saltus:2:8: error step-unstable/m);
    } finally { rmSync(dir, { recursive: true, force: true }); }
  });
});
