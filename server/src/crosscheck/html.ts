// The cross-check report as one standalone HTML page (also the body of the editor's
// webview): verdict, warnings, the error table, the spike raster, and per-neuron state and
// adjoint traces drawn as inline SVG (svg.ts). No script, no external resource.
//
// Invariants: every piece of user text (names from the scenario and the model file, the
// description, labels, warnings) is HTML-escaped; the page's CSP forbids scripts; colours
// are our own, themed by VS Code's CSS variables when shown in a webview.
import { gridSection } from './gridHtml';
import { type RasterRow, errorBar, esc, lineChart, raster, sci } from './svg';
import type { AnyRow, CrossCheckResult, NeuronTrace } from './types';
import { rowDisplay, rowLabel } from './types';
import { pctText } from './report';

export interface CrossCheckPageOptions {
  /** Webview CSP source (`webview.cspSource`); omit for a standalone file. */
  cspSource?: string;
  /** Nonce of the inline stylesheet (give a fresh random one in a webview). */
  nonce?: string;
  title?: string;
}

const ms = (s: number): number => s * 1e3;

export function crossCheckHtml(r: CrossCheckResult, o: CrossCheckPageOptions = {}): string {
  const nonce = o.nonce ?? 'saltus-crosscheck';
  const csp = o.cspSource
    ? `default-src 'none'; style-src 'nonce-${esc(nonce)}'; img-src ${esc(o.cspSource)} data:;`
    : `default-src 'none'; style-src 'nonce-${esc(nonce)}'; img-src data:;`;
  const title = o.title ?? 'Gradient cross-check';
  return `<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="${csp}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${esc(title)}: ${esc(r.source)}</title>
<style nonce="${esc(nonce)}">${STYLE}</style>
</head><body>
<header><h1>${esc(title)}</h1><p class="sub">${esc(r.source)} with ${esc(r.scenario)}</p>
${r.description ? `<p class="desc">${esc(r.description)}</p>` : ''}</header>
<main>${r.status === 'ok' ? body(r) : problems(r)}</main>
</body></html>`;
}

function problems(r: CrossCheckResult): string {
  const what = r.status === 'cancelled' ? 'The check was cancelled.' : r.status === 'failed' ? 'A simulation failed.' : 'The scenario cannot be checked:';
  return `<section class="verdict bad"><strong>${esc(what)}</strong><ul class="errors">${r.errors.map((e) => `<li><code>${esc(e.path)}</code> ${esc(e.message)}</li>`).join('')}</ul></section>`;
}

function body(r: CrossCheckResult): string {
  return [verdict(r), warnings(r), table(r), ...(r.grid ? [gridSection(r.grid)] : []), spikes(r), traces(r, 'states'), traces(r, 'costates'), footer(r)].join('\n');
}

function verdict(r: CrossCheckResult): string {
  const ok = r.passed;
  const counts = Object.entries(r.spikeCounts).map(([p, c]) => `${esc(p)}: ${!(p in r.spikes) ? 'does not fire' : `${c.reduce((a, b) => a + b, 0)}${c.length > 1 ? ` (${c.join(', ')})` : ''}`}`).join('; ');
  const worst = r.worst ? ` at <code>${esc(r.worst.label)}</code>` : '';
  const compared = r.gradients.length + r.params.length > 0;
  const head = ok ? 'The derived adjoint gradient agrees with finite differences'
    : !compared ? 'No gradient could be compared' : 'The adjoint gradient and the finite differences disagree';
  const near = [...r.closestToGrazing].sort((a, b) => a.ratio - b.ratio)[0];
  return `<section class="verdict ${ok ? 'good' : 'bad'}">
<div class="big">${esc(head)}</div>
<dl class="facts">
<dt>largest relative error</dt><dd>${esc(sci(r.maxRelativeError, 3))}${worst} (tolerance ${esc(sci(r.tolerance, 2))})${r.noiseLimited ? `; ${r.noiseLimited} row${r.noiseLimited === 1 ? '' : 's'} agree only within the finite differences' own noise` : ''}</dd>
${r.sample ? `<dt>sampled check</dt><dd>${r.sample.rows} of ${r.sample.of} rows (weights and parameters), seed ${r.sample.seed}; repeat it with the same seed</dd>` : ''}
${near ? `<dt>closest to grazing</dt><dd><code>${esc(`${near.population}[${near.index}]`)}</code> at ${esc(sci(ms(near.time), 6))} ms: |gdot| ${esc(pctText(near.ratio))} of its typical guard slope</dd>` : ''}
<dt>loss</dt><dd>${esc(r.lossText)} = ${esc(sci(r.loss, 6))} [${esc(r.lossUnit)}]</dd>
<dt>spikes</dt><dd>${counts || 'none'}</dd>
<dt>simulated</dt><dd>${esc(sci(ms(r.duration), 4))} ms; ${r.timing.simulations} simulations in ${esc(r.timing.total_ms.toFixed(0))} ms (integrator rtol ${esc(sci(r.settings.rtol, 2))}, step ${esc(sci(r.settings.relStep, 2))} x value)</dd>
</dl></section>`;
}

function warnings(r: CrossCheckResult): string {
  if (r.warnings.length === 0) return '';
  return `<section><h2>Warnings</h2><ul class="warnings">${r.warnings.map((w) => `<li><span class="tag">${esc(w.kind)}</span> ${esc(w.message)}</li>`).join('')}</ul></section>`;
}

function row(x: AnyRow, r: CrossCheckResult, worst: boolean): string {
  const status = x.status === 'ok' ? (x.withinNoise ? 'agrees within FD noise' : 'agrees') : x.status === 'above-tolerance' ? 'disagrees'
    : x.status === 'spike-count-changed' ? 'no finite difference' : x.status === 'non-finite' ? 'not finite' : 'simulation failed';
  const d = rowDisplay(x, r.lossUnit);
  const notes = [x.note, x.stepBasis ? `value 0: step relative to ${x.stepBasis}` : undefined].filter((n): n is string => Boolean(n));
  return `<tr class="${x.status}${worst ? ' worst' : ''}"><th>${esc(rowLabel(x))}</th><td class="num">${esc(`${sci(d.value)} ${d.valueUnit}`.trimEnd())}</td><td class="num">${esc(sci(d.adjoint, 7))}</td><td class="num">${esc(sci(d.finiteDifference, 7))}</td><td class="unit">${esc(d.gradientUnit)}</td><td class="num">${esc(sci(x.relativeError, 2))}</td><td>${errorBar(x.relativeError, r.tolerance)}</td><td class="status">${esc(status)}${notes.map((n) => `<div class="note">${esc(n)}</div>`).join('')}</td></tr>`;
}

function table(r: CrossCheckResult): string {
  const head = `<tr><th>weight or parameter</th><th class="num">value (file's unit)</th><th class="num">dL/d(value): adjoint</th><th class="num">finite difference</th><th>unit of dL/d(value)</th><th class="num">relative error</th><th>error, log scale 10⁻¹²…1 (bar: tolerance)</th><th>status</th></tr>`;
  const weights = r.gradients.map((x, k) => row(x, r, r.worst?.kind === 'weight' && r.worst.index === k)).join('');
  const params = r.params.map((x, k) => row(x, r, r.worst?.kind === 'param' && r.worst.index === k)).join('');
  const delays = (r.delays ?? []).map((x, k) => row(x, r, r.worst?.kind === 'delay' && r.worst.index === k)).join('');
  return `<section><h2>Gradients</h2>
<p class="note">Weights are <code>w&lt;projection&gt; from[j] -&gt; to[i]</code> (weights[to][from] of that projection); parameters are shared by their population. Each value is shown in the unit the model file writes it in, and dL/d(value) per that same unit (the JSON report keeps SI). Relative error = |adjoint − FD| / max(|adjoint|, |FD|), each row on its own; where it exceeds the tolerance the difference is repeated at a quarter of the step, and a row whose |adjoint − FD| lies within that finite difference's own noise agrees (e.g. an exact zero against noise).</p>
<table class="grads"><thead>${head}</thead><tbody>${weights}${params ? `<tr class="group"><th colspan="8">trainable parameters</th></tr>${params}` : ''}${delays ? `<tr class="group"><th colspan="8">transmission delays (<code>d&lt;projection&gt;</code>; one-sided at 0)</th></tr>${delays}` : ''}</tbody></table></section>`;
}

function spikes(r: CrossCheckResult): string {
  const rows: RasterRow[] = [];
  const spikeTargets = r.lossKind === 'spike-time' ? r.lossTarget : null;
  for (const p of r.populations) {
    const list = p.kind === 'input' ? r.inputSpikes[p.name] : r.spikes[p.name];
    if (!list) continue;
    for (let i = 0; i < p.size; i++) {
      const rowSpec: RasterRow = { label: `${p.name}[${i}]`, times: list.filter(([, k]) => k === i).map(([t]) => ms(t)), cls: p.kind === 'input' ? 'tick-input' : 'tick-model' };
      if (spikeTargets?.population === p.name && spikeTargets.values[i] !== undefined) rowSpec.targets = [ms(spikeTargets.values[i]!)];
      rows.push(rowSpec);
    }
  }
  if (rows.length === 0) return '';
  return `<section><h2>Spike raster</h2>
<p class="legend"><span class="key k-input"></span> input spikes (scenario)${Object.keys(r.spikes).length ? ' <span class="key k-model"></span> simulated spikes (event-located)' : ''}${spikeTargets ? ' <span class="key k-target"></span> target first-spike time' : ''}</p>
${raster(rows, [0, ms(r.duration)], 'time [ms]')}</section>`;
}

function traces(r: CrossCheckResult, which: 'states' | 'costates'): string {
  const tr = r.traces;
  if (!tr || tr.neurons.length === 0) return '';
  const t = tr.time.map(ms);
  const charts = (n: NeuronTrace): string => n[which].map((ch) => {
    const isLoss = which === 'states' && r.lossKind === 'state-integral' && n.population === r.lossTarget?.population && ch.name === r.lossTarget.state;
    const target = isLoss ? r.lossTarget!.values[n.index] : undefined;
    const name = which === 'states' ? ch.name : `λ_${ch.name} = ∂L/∂${ch.name}`;
    const spec = {
      title: `${n.population}[${n.index}] · ${name}`,
      xLabel: 'time [ms]', yLabel: `${which === 'states' ? ch.name : `λ_${ch.name}`} [${ch.unit}]`,
      xRange: [0, ms(r.duration)] as [number, number],
      series: [{ x: t, y: ch.values.map((v) => v / ch.scale), cls: which === 'states' ? 'line-state' : 'line-costate' }],
      markers: n.spikes.map(ms),
      ...(target !== undefined ? { reference: { y: target / ch.scale, label: 'target' } } : {}),
    };
    return lineChart(spec);
  }).join('');
  const spiking = tr.neurons.some((n) => n.spikes.length > 0) ? ' <span class="key k-spike"></span> this neuron\'s spikes' : '';
  const omitted = Object.entries(tr.omitted).map(([p, k]) => `${k} more neuron${k === 1 ? '' : 's'} of ${esc(p)} not drawn`).join('; ');
  const intro = which === 'states'
    ? `<p class="legend"><span class="key k-state"></span> state (forward, DOPRI5 with event location)${spiking}${r.lossKind === 'state-integral' ? ' <span class="key k-target"></span> loss target' : ''}. Resets and received spikes show as vertical steps.</p>`
    : `<p class="legend"><span class="key k-costate"></span> costate λ = ∂L/∂x(t), integrated backwards from λ(T) = 0 with the derived adjoint flow and jumps${spiking}.</p>`;
  return `<section><h2>${which === 'states' ? 'State traces' : 'Adjoint traces'}</h2>${intro}
${tr.neurons.map((n) => `<div class="neuron"><div class="charts">${charts(n)}</div></div>`).join('\n')}
${omitted ? `<p class="note">${omitted}.</p>` : ''}</section>`;
}

function footer(r: CrossCheckResult): string {
  const models = r.models.map((m) => `<li><code>${esc(m.name)}</code>: recorded at each spike: ${esc((m.spikeRecord ?? []).join(', ') || (m.spikeRecord ? 'nothing' : '(does not fire)'))}; at each received spike: ${esc((m.incomingRecord ?? []).join(', ') || (m.incomingRecord ? 'nothing' : '(no incoming block)'))}; backward pass ${m.eventBased ? 'purely event-based' : 'needs the forward trajectory between events'}</li>`).join('');
  return `<section><h2>What the derivation asked for</h2><ul class="note">${models}</ul></section>`;
}

const STYLE = `
:root { --fg: var(--vscode-editor-foreground, #1c2430); --bg: var(--vscode-editor-background, #fcfbf8);
  --muted: var(--vscode-descriptionForeground, #5f6877); --rule: var(--vscode-panel-border, #dcd6c8);
  --plot: rgba(127,127,127,.05); --grid: rgba(127,127,127,.22);
  --state: #1d6b74; --costate: #8c3f78; --spike: #d0802a; --input: #47607e; --target: #5d8a2a;
  --good: #2f7d4f; --bad: #b23b3b; --good-bg: rgba(47,125,79,.09); --bad-bg: rgba(178,59,59,.09); }
body.vscode-dark, body.vscode-high-contrast { --state: #5cc0c9; --costate: #e08ad0; --spike: #f0a54f; --input: #93aed0; --target: #a6d36a; --good: #6fcf97; --bad: #f08080; }
body { color: var(--fg); background: var(--bg); font-family: var(--vscode-font-family, system-ui, sans-serif); font-size: 14px;
  line-height: 1.45; margin: 0; padding: 16px 24px 40px; max-width: 1160px; }
h1 { font-size: 19px; margin: 0 0 2px; font-weight: 600; }
h2 { font-size: 15px; margin: 22px 0 6px; border-top: 1px solid var(--rule); padding-top: 10px; }
.sub, .note, .legend { color: var(--muted); font-size: 12px; margin: 2px 0 8px; }
.desc { margin: 4px 0 10px; max-width: 900px; }
code { font-family: var(--vscode-editor-font-family, ui-monospace, monospace); font-size: 12px; }
.verdict { border-left: 4px solid var(--good); background: var(--good-bg); padding: 8px 14px; margin: 10px 0; }
.verdict.bad { border-left-color: var(--bad); background: var(--bad-bg); }
.verdict .big { font-size: 16px; font-weight: 600; margin-bottom: 4px; }
dl.facts { display: grid; grid-template-columns: max-content 1fr; gap: 2px 14px; margin: 0; font-size: 13px; }
dl.facts dt { color: var(--muted); } dl.facts dd { margin: 0; }
ul.warnings { padding-left: 18px; margin: 4px 0; font-size: 13px; }
.tag { font-size: 11px; padding: 0 6px; border-radius: 8px; border: 1px solid var(--spike); color: var(--spike); }
ul.errors { margin: 6px 0; padding-left: 18px; }
table.grads { border-collapse: collapse; font-size: 12.5px; }
table.grads th, table.grads td { padding: 3px 10px 3px 0; text-align: left; vertical-align: middle; }
table.grads thead th { color: var(--muted); font-weight: 500; border-bottom: 1px solid var(--rule); }
table.grads tbody th { font-weight: 500; white-space: nowrap; font-family: var(--vscode-editor-font-family, ui-monospace, monospace); font-size: 12px; }
table.grads tbody tr + tr > * { border-top: 1px dotted var(--rule); }
table.grads .num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.grads tr.group th { color: var(--muted); padding-top: 8px; }
table.grads tr.worst th::after { content: "  ← largest"; color: var(--muted); font-family: var(--vscode-font-family, system-ui, sans-serif); }
table.grads tr.above-tolerance .status, table.grads tr.simulation-failed .status, table.grads tr.non-finite .status { color: var(--bad); font-weight: 600; }
table.grads tr.spike-count-changed .status { color: var(--spike); }
table.grads .status .note { margin: 0; }
.neuron { margin: 6px 0; } .charts { display: flex; flex-wrap: wrap; gap: 4px 10px; }
svg.chart { font-family: var(--vscode-font-family, system-ui, sans-serif); overflow: visible; max-width: 100%; height: auto; }
svg .plot-bg { fill: var(--plot); } svg .frame { fill: none; stroke: var(--muted); stroke-width: .8; }
svg .grid { stroke: var(--grid); stroke-width: .6; }
svg .tick { fill: var(--muted); font-size: 10px; } svg .axis-label { fill: var(--muted); font-size: 11px; }
svg .chart-title { fill: var(--fg); font-size: 12px; font-weight: 600; }
svg .line-state { fill: none; stroke: var(--state); stroke-width: 1.5; stroke-linejoin: round; }
svg .line-costate { fill: none; stroke: var(--costate); stroke-width: 1.5; stroke-linejoin: round; }
svg .spike-line { stroke: var(--spike); stroke-width: .9; stroke-dasharray: 3 3; opacity: .8; } svg .spike-mark { fill: var(--spike); }
svg .reference { stroke: var(--target); stroke-width: 1.2; stroke-dasharray: 1.5 3; } svg .ref-label { fill: var(--target); font-size: 10px; }
svg .tick-input { stroke: var(--input); stroke-width: 2; } svg .tick-model { stroke: var(--spike); stroke-width: 2; }
svg .target-mark { fill: none; stroke: var(--target); stroke-width: 1.6; }
svg.bar .bar-bg { fill: var(--grid); } svg.bar .bar-ok { fill: var(--good); } svg.bar .bar-bad { fill: var(--bad); } svg.bar .bar-tol { stroke: var(--fg); stroke-width: 1.2; }
.key { display: inline-block; width: 18px; height: 3px; vertical-align: middle; margin: 0 4px 0 10px; }
.k-state { background: var(--state); } .k-costate { background: var(--costate); } .k-spike { background: var(--spike); }
.k-input { background: var(--input); } .k-model { background: var(--spike); } .k-target { background: var(--target); }
svg.conv polyline { stroke-width: 1.4; } svg.conv .ref { stroke: var(--muted); }
svg.conv .s0 { stroke: var(--state); } svg.conv .s1 { stroke: var(--costate); } svg.conv .s2 { stroke: var(--spike); }
svg.conv .s3 { stroke: var(--input); } svg.conv .s4 { stroke: var(--target); } svg.conv .s5 { stroke: var(--bad); }
p.warn { color: var(--bad); }
`;
