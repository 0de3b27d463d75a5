// The faces of the gradient cross-check: `saltus crosscheck` (JSON contract, text, exit codes,
// usage errors), the standalone HTML page (escaping, no script, one chart per state and
// costate), the warnings for near-grazing spikes and spike-count changes, and a negative
// control: a derivation with its phi term removed (phi, the jump multiplier
// of docs/adjoint.md) must fail the check, so the check can fail.
import { mkdtempSync, readFileSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, test } from 'vitest';
import { analyse } from '../server/src/pipeline';
import { derivationFor } from '../server/src/adjoint';
import { ZERO } from '../server/src/symbolic/sym';
import { crossCheckHtml, runCrossCheckSync } from '../server/src/crosscheck';
import { root, runCli } from './helpers/cli';
import { progressReporter } from '../server/src/cli/progress';
import { lifText } from './helpers/models';

const read = (p: string): string => readFileSync(join(root, p), 'utf8');

describe('saltus crosscheck', () => {
  test('--format json keeps the contract fields and exits 0 on a passing scenario', () => {
    const r = runCli(['crosscheck', 'samples/adaptive_lif.saltus', '--scenario', 'samples/scenarios/adaptive_lif.json', '--format', 'json']);
    expect(r.stderr).toBe('');
    expect(r.code).toBe(0);
    const j = JSON.parse(r.stdout);
    expect(typeof j.loss).toBe('number');
    expect(Object.keys(j.spikes).sort()).toEqual(['hid', 'out']);
    for (const s of j.spikes.hid) { expect(s).toHaveLength(2); expect(Number.isInteger(s[1])).toBe(true); }
    expect(j.gradients).toHaveLength(6);
    for (const g of j.gradients) for (const k of ['projection', 'to', 'from', 'adjoint', 'finiteDifference', 'relativeError']) expect(g).toHaveProperty(k);
    expect(j.gradients[0]).toMatchObject({ projection: 0, to: 0, from: 0 });
    expect(j.params.map((p: { population: string; name: string }) => `${p.population}.${p.name}`)).toEqual(['hid.beta', 'out.beta']);
    for (const p of j.params) for (const k of ['name', 'adjoint', 'finiteDifference', 'relativeError']) expect(p).toHaveProperty(k);
    expect(j.maxRelativeError).toBeLessThan(1e-4);
    expect(j.passed).toBe(true);
  });

  test('text output and the --html page', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-crosscheck-'));
    const out = join(dir, 'sub', 'report.html');
    const r = runCli(['crosscheck', 'samples/lif_current.saltus', '--scenario', 'samples/scenarios/lif_current.json', '--html', out]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/w0 sensor\[0\] -> hid\[0\]/);
    expect(r.stdout).toMatch(/hid\.tau_m/);
    expect(r.stdout).toMatch(/largest relative error .* the adjoint gradient agrees/);
    // value and dL/d(value) in the same unit system, labelled: tau_m = 20 [ms] in the file, so
    // the gradient is per ms, 1e-3 times the SI gradient (per s) of the JSON report.
    const line = r.stdout.split('\n').find((l) => l.startsWith('hid.tau_m'))!;
    expect(line).toMatch(/^hid\.tau_m\s+20 ms\s+(\S+)\s+(\S+)\s+\[s\/ms\]/);
    const json = JSON.parse(runCli(['crosscheck', 'samples/lif_current.saltus', 'samples/scenarios/lif_current.json', '--format', 'json']).stdout);
    const si = json.params.find((p: { name: string; population: string }) => p.population === 'hid' && p.name === 'tau_m').adjoint;
    const shown = Number(/^hid\.tau_m\s+20 ms\s+(\S+)/.exec(line)![1]);
    expect(Math.abs(shown - si * 1e-3)).toBeLessThan(1e-7 * Math.abs(si * 1e-3)); // 8 significant digits printed
    expect(r.stdout).toMatch(/w0 sensor\[0\] -> hid\[0\]\s+4\.2\s+\S+\s+\S+\s+\[s\]/); // a dimensionless weight: L's unit per 1
    const html = readFileSync(out, 'utf8');
    expect(html).toContain('<th class="num">value (file\'s unit)</th><th class="num">dL/d(value): adjoint</th>');
    expect(html).toMatch(/<td class="num">20 ms<\/td>.*?<td class="unit">s\/ms<\/td>/);
    expect(html).toMatch(/^<!DOCTYPE html>/);
    expect(html).not.toMatch(/<script/i);
    expect(html).toMatch(/Content-Security-Policy" content="default-src 'none'/);
    // 2 hidden LIF x 2 states + 1 readout x 2 states, once for states and once for costates, plus the raster.
    expect((html.match(/<svg class="chart"/g) ?? []).length).toBe(2 * 6 + 1);
    expect(html).toMatch(/time \[ms\]/);
    expect(html).toMatch(/λ_V \[s\]/); // L in s (dimensionless V), per unit of V
  });

  test('a broken scenario exits 1 with the JSON path on stdout; usage errors exit 2', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-crosscheck-'));
    const bad = join(dir, 'bad.json');
    writeFileSync(bad, JSON.stringify({ ...JSON.parse(read('samples/scenarios/readout.json')), projections: [{ from: 'sensor', to: 'score', weights: [[1, 2]] }] }));
    const r = runCli(['crosscheck', 'samples/readout.saltus', '--scenario', bad]);
    expect(r.code).toBe(1);
    expect(r.stdout).toMatch(/projections\[0\]\.weights: expected 2 rows/);
    const j = runCli(['crosscheck', 'samples/readout.saltus', '--scenario', bad, '--format', 'json']);
    expect(JSON.parse(j.stdout).errors[0].path).toBe('projections[0].weights');
    expect(runCli(['crosscheck', 'samples/readout.saltus']).code).toBe(2);
    const missing = runCli(['crosscheck', 'samples/readout.saltus', '--scenario', join(dir, 'nope.json')]);
    expect(missing.code).toBe(2);
    expect(missing.stderr).toMatch(/nope\.json: no such file/);
    expect(runCli(['crosscheck', 'samples/readout.saltus', '--scenario', bad, '--format', 'xml']).code).toBe(2);
    // A negative number after an option is its value, so the message is about the number (before: "ambiguous").
    const negative = runCli(['crosscheck', 'samples/readout.saltus', '--scenario', bad, '--tolerance', '-1']);
    expect(negative.code).toBe(2);
    expect(negative.stderr).toMatch(/^saltus crosscheck: --tolerance must be a positive number; got '-1'$/m);
    expect(runCli(['crosscheck', 'samples/readout.saltus', bad, '--sample', '0']).stderr).toMatch(/--sample must be a whole number >= 1; got '0'/);
    expect(runCli(['crosscheck', 'samples/readout.saltus', bad, '--sample', '2', '--seed', '-3']).stderr).toMatch(/--seed must be a whole number >= 0; got '-3'/);
    expect(runCli(['crosscheck', 'samples/readout.saltus', bad, '--seed', '3']).stderr).toMatch(/--seed S goes with --sample N/);
    expect(runCli(['help', 'crosscheck']).stdout).toMatch(/--scenario S\.json/);
  });

  test('the scenario may be the second argument; the old name gradcheck still runs, hidden, with a notice', () => {
    const pos = runCli(['crosscheck', 'samples/readout.saltus', 'samples/scenarios/readout.json', '--format', 'json']);
    expect(pos.code).toBe(0);
    expect(JSON.parse(pos.stdout).passed).toBe(true);
    const old = runCli(['gradcheck', 'samples/readout.saltus', 'samples/scenarios/readout.json', '--format', 'json']);
    expect(old.code).toBe(0);
    expect(JSON.parse(old.stdout)).toMatchObject({ passed: true, loss: JSON.parse(pos.stdout).loss });
    expect(old.stderr.trim().split('\n')).toEqual([expect.stringMatching(/'gradcheck' was renamed 'crosscheck'/)]);
    const help = runCli(['--help']).stdout;
    expect(help).toMatch(/^ {2}crosscheck /m);
    expect(help).not.toMatch(/gradcheck/);
    expect(runCli(['gradchek']).stderr).toMatch(/did you mean 'crosscheck'/);
    expect(runCli(['crosscheck', 'samples/readout.saltus', 'a.json', 'b.json']).code).toBe(2);
    expect(runCli(['crosscheck', 'samples/readout.saltus', 'a.json', '--scenario', 'b.json']).code).toBe(2);
  });

  test('--sample N --seed S: the report states the sample in text, JSON and HTML', () => {
    const dir = mkdtempSync(join(tmpdir(), 'saltus-crosscheck-'));
    const out = join(dir, 'r.html');
    const args = ['crosscheck', 'samples/lif_current.saltus', 'samples/scenarios/lif_current.json', '--sample', '4', '--seed', '9'];
    const text = runCli([...args, '--html', out]);
    expect(text.code).toBe(0);
    expect(text.stdout).toMatch(/sampled check: 4 of 12 rows \(weights and parameters\), seed 9/);
    expect(readFileSync(out, 'utf8')).toMatch(/sampled check<\/dt><dd>4 of 12 rows \(weights and parameters\), seed 9/);
    const j = JSON.parse(runCli([...args, '--format', 'json']).stdout);
    expect(j.sample).toEqual({ rows: 4, of: 12, seed: 9 });
    expect(j.gradients.length + j.params.length).toBe(4);
    expect(j).toHaveProperty('closestToGrazing');
    expect(j.noiseLimited).toBe(0);
  });

  test('a tolerance below the achievable accuracy fails with exit 1', () => {
    const r = runCli(['crosscheck', 'samples/readout.saltus', '--scenario', 'samples/scenarios/readout.json', '--tolerance', '1e-15']);
    expect(r.code).toBe(1);
    expect(r.stdout).toMatch(/CHECK FAILED/);
  });
});

describe('the check can fail, and says why', () => {
  test('negative control: dropping phi from the spike jump is caught', () => {
    const a = analyse(read('samples/lif_current.saltus'));
    const broken = (m: Parameters<typeof derivationFor>[0]) => {
      const d = derivationFor(m);
      return d.spike ? { ...d, spike: { ...d.spike, phi: ZERO } } : d;
    };
    const r = runCrossCheckSync(a, read('samples/scenarios/lif_current.json'), { derivation: broken, traces: false });
    expect(r.status).toBe('ok');
    expect(r.passed).toBe(false);
    expect(r.maxRelativeError!).toBeGreaterThan(1e-2);
    expect(r.gradients.some((g) => g.status === 'above-tolerance')).toBe(true);
  });

  const MODEL = analyse(lifText());
  // With tau_m = 2 tau_s one input of weight w raises V to the peak w/4 (Wunderlich & Pehle
  // Table 1 model, our closed form in crosscheck-eventprop.test.ts): w near 4 theta grazes.
  const near = (w: number) => ({ duration_s: 0.03, populations: { in: { size: 1, spikes: [[0.002, 0]] }, n: { model: 'L', size: 1 } },
    projections: [{ from: 'in', to: 'n', weights: [[w]] }], loss: { kind: 'state-integral', population: 'n', state: 'V', target: 0 } });

  test('a near miss: the +h perturbation adds a spike, so no finite difference is reported', () => {
    const r = runCrossCheckSync(MODEL, near(4 * (1 - 1e-7)), { traces: false });
    expect(r.spikeCounts.n).toEqual([0]);
    expect(r.gradients[0]!.finiteDifference).toBeNull();
    expect(r.gradients[0]!.status).toBe('spike-count-changed');
    expect(r.warnings.map((w) => w.kind)).toEqual(expect.arrayContaining(['near-miss', 'spike-count-changed']));
    expect(r.warnings.find((w) => w.kind === 'spike-count-changed')!.message).toMatch(/n\[0\] 0 -> 1 at \+h.*meaningless/);
    expect(r.passed).toBe(false);
  });

  test('a grazing spike is flagged; every spike says how close it came', () => {
    const r = runCrossCheckSync(MODEL, near(4 * (1 + 1e-6)), { traces: false });
    expect(r.spikeCounts.n).toEqual([1]);
    const g = r.warnings.find((w) => w.kind === 'grazing');
    expect(g?.message).toMatch(/n\[0\] spikes at .* nearly grazing crossing/);
    expect(r.spikeSlopeRatios.n).toHaveLength(1);
    expect(r.spikeSlopeRatios.n![0]!).toBeLessThan(0.02);
    expect(r.closestToGrazing).toEqual([expect.objectContaining({ population: 'n', index: 0, spikes: 1, time: r.spikes.n![0]![0], ratio: r.spikeSlopeRatios.n![0] })]);
    // A comfortable crossing is not flagged, and its ratio says so.
    const ok = runCrossCheckSync(MODEL, near(5), { traces: false });
    expect(ok.warnings.filter((w) => w.kind === 'grazing' || w.kind === 'near-miss')).toEqual([]);
    expect(ok.spikeSlopeRatios.n![0]!).toBeGreaterThan(0.02);
  });
});

describe('the HTML page', () => {
  test('escapes user text and contains no script', () => {
    const a = analyse(read('samples/readout.saltus'));
    const s = JSON.parse(read('samples/scenarios/readout.json'));
    s.description = '<script>alert("x")</script> & <b>bold</b>';
    const r = runCrossCheckSync(a, s, { sourceLabel: 'a<b>.saltus', scenarioLabel: '"quoted" & <odd>.json' });
    const html = crossCheckHtml(r, { nonce: 'n0nce' });
    expect(html).not.toMatch(/<script/i);
    expect(html).not.toMatch(/<b>/);
    expect(html).toContain('&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp; &lt;b&gt;bold&lt;/b&gt;');
    expect(html).toContain('a&lt;b&gt;.saltus');
    expect(html).toContain('<style nonce="n0nce">');
    const webview = crossCheckHtml(r, { nonce: 'n1', cspSource: 'vscode-resource:' });
    expect(webview).toMatch(/style-src 'nonce-n1'; img-src vscode-resource: data:/);
  });

  test('an invalid scenario renders its errors', () => {
    const r = runCrossCheckSync(analyse(read('samples/readout.saltus')), '{"duration_s": 1}');
    const html = crossCheckHtml(r);
    expect(html).toMatch(/cannot be checked/);
    expect(html).toContain('<code>populations</code>');
    expect(existsSync(join(root, 'samples', 'scenarios', 'readout.json'))).toBe(true);
  });
});

describe('progress of a long check on stderr (cli/progress.ts)', () => {
  const run = (tty: boolean, estimate: number, steps: number, stepMs: number) => {
    let clock = 0;
    const written: string[] = [];
    const rep = progressReporter({ write: (t) => written.push(t), tty, now: () => clock });
    const total = 2 + 2 * steps;
    clock += estimate / total;
    rep.update({ done: 1, total, phase: 'forward', firstSimulation_ms: estimate / total, estimate_ms: estimate });
    for (let d = 2; d <= total; d += 2) { clock += stepMs; rep.update({ done: d, total, phase: 'finite-differences', estimate_ms: estimate }); }
    rep.end();
    return written;
  };

  test('a short check writes nothing', () => {
    expect(run(true, 1500, 10, 10)).toEqual([]);
    expect(run(false, 9000, 10, 100)).toEqual([]);
  });

  test('on a terminal: the estimate, one line updated in place, then done', () => {
    const w = run(true, 60_000, 100, 600);
    expect(w[0]).toBe('saltus crosscheck: 202 simulations planned; the first (the whole network) took 297 ms, so this takes about 1 min; --sample N checks N of the rows (seeded, --seed S)\n');
    const updates = w.filter((x) => x.startsWith('\r\x1b[K'));
    expect(updates.length).toBeGreaterThan(50);
    expect(updates.every((x) => !x.includes('\n'))).toBe(true);
    expect(updates.at(-2)).toMatch(/^\r\x1b\[Ksaltus crosscheck: 2\d\d\/202 simulations \(finite-differences\), 1 min \d+ s so far, about \d+ (ms|s) left$/);
    expect(w.at(-2)).toBe('\r\x1b[K');
    expect(w.at(-1)).toMatch(/^saltus crosscheck: done in 1 min \d+ s\n$/);
  });

  test('to a file or pipe: the estimate, then a line every 10 s', () => {
    const w = run(false, 60_000, 100, 600);
    expect(w[0]).toMatch(/^saltus crosscheck: 202 simulations planned/);
    const lines = w.slice(1, -1);
    expect(lines.length).toBeGreaterThanOrEqual(5);
    expect(lines.length).toBeLessThanOrEqual(7); // about 61 s of work, one line per 10 s
    expect(lines.every((x) => x.endsWith('\n') && !x.includes('\r'))).toBe(true);
  });
});
