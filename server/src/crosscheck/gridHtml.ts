// The "on the grid" section of the cross-check page: each gradient row's error against the
// exact gradient at dt, dt/2, dt/4 as a table, and a log-log plot of error against dt with a
// fourth-order slope for reference. Standalone SVG (no scripts), colours from the page's theme.
import type { GridConvergence } from './grid';

const esc = (s: string): string => s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
const sci = (v: number | null, d = 2): string => (v === null || !Number.isFinite(v) ? '–' : v.toExponential(d));
const ms = (dt: number): string => `${Number((dt * 1e3).toPrecision(4))} ms`;

export function gridSection(g: GridConvergence): string {
  const pops = Object.entries(g.substeps).map(([p, m]) => `${esc(p)}: ${g.exact[p] ? 'exact map' : `ETDRK4 map, ${m[0]} sub-step${m[0] === 1 ? '' : 's'} per step`}`).join('; ');
  const head = `<tr><th>value</th>${g.dts.map((d) => `<th>error at ${esc(ms(d))}</th>`).join('')}<th>observed order</th></tr>`;
  const ord = (o: (number | null)[]): string => o.map((x) => (x === null ? '–' : x.toFixed(1))).join(' / ');
  const rows = g.rows.map((r) => `<tr><td><code>${esc(r.label)}</code></td>${r.errors.map((e) => `<td class="num">${esc(sci(e))}</td>`).join('')}<td class="num">${esc(ord(r.orders))}</td></tr>`).join('');
  const loss = `<tr><td>loss</td>${g.loss.errors.map((e) => `<td class="num">${esc(sci(e))}</td>`).join('')}<td></td></tr>`;
  return `<section class="grid"><h2>On the time grid of generated code</h2>
<p>The same scenario on the grid generated code simulates (docs/network-step.md): at ${esc(ms(g.dts[0]!))} as generated code runs it, then at half and a quarter of it with the same sub-steps, against the exact gradient above. ${pops}. Largest gradient error at ${esc(ms(g.dts[0]!))}: <strong>${esc(sci(g.worst, 3))}</strong>.</p>
${g.failures.map((f) => `<p class="warn">At ${esc(ms(f.dt))}: ${esc(f.error)}</p>`).join('')}
<div class="gridplot">${plot(g)}</div>
<table class="grads on-grid"><thead>${head}</thead><tbody>${loss}${rows}</tbody></table>
<p class="note">Order: log2 of the error's fall per halving of dt; – where the error does not move (it is then the accurate simulation's own error, or rounding).</p>
</section>`;
}

/** Error against dt on log-log axes, one polyline per row, and an order-4 slope for reference. */
function plot(g: GridConvergence): string {
  const W = 420, H = 260, L = 56, R = 12, T = 12, B = 40;
  const pts = g.rows.flatMap((r) => r.errors.map((e, k) => ({ e, d: g.dts[k]! }))).filter((p) => p.e !== null && p.e > 0) as { e: number; d: number }[];
  if (pts.length === 0) return '<p>No error to plot.</p>';
  const lx = (d: number): number => Math.log10(d);
  const dMin = Math.min(...g.dts), dMax = Math.max(...g.dts);
  const eMin = Math.min(...pts.map((p) => p.e)), eMax = Math.max(...pts.map((p) => p.e));
  const y0 = Math.floor(Math.log10(eMin)), y1 = Math.max(y0 + 1, Math.ceil(Math.log10(eMax)));
  const x0 = lx(dMin) - 0.1, x1 = lx(dMax) + 0.1;
  const X = (d: number): number => L + ((lx(d) - x0) / (x1 - x0)) * (W - L - R);
  const Y = (e: number): number => T + ((y1 - Math.log10(e)) / (y1 - y0)) * (H - T - B);
  const lines = g.rows.map((r, k) => {
    const p = r.errors.map((e, j) => (e !== null && e > 0 ? `${X(g.dts[j]!).toFixed(1)},${Y(e).toFixed(1)}` : null)).filter(Boolean);
    return p.length > 1 ? `<polyline class="s${k % 6}" fill="none" points="${p.join(' ')}"><title>${esc(r.label)}</title></polyline>` : '';
  }).join('');
  // reference slope 4 through the largest error at the first dt
  const anchor = Math.max(...g.rows.map((r) => r.errors[0] ?? 0));
  const ref = anchor > 0 ? `<polyline class="ref" fill="none" stroke-dasharray="4 3" points="${X(dMax).toFixed(1)},${Y(anchor).toFixed(1)} ${X(dMin).toFixed(1)},${Y(Math.max(anchor * (dMin / dMax) ** 4, 10 ** y0)).toFixed(1)}"><title>fourth order</title></polyline>` : '';
  const yt = Array.from({ length: y1 - y0 + 1 }, (_, i) => y0 + i).map((p) => `<line class="grid" x1="${L}" x2="${W - R}" y1="${Y(10 ** p)}" y2="${Y(10 ** p)}"/><text class="tick" x="${L - 6}" y="${Y(10 ** p) + 4}" text-anchor="end">1e${p}</text>`).join('');
  const xt = g.dts.map((d) => `<text class="tick" x="${X(d)}" y="${H - B + 16}" text-anchor="middle">${esc(ms(d))}</text>`).join('');
  return `<svg class="chart conv" viewBox="0 0 ${W} ${H}" width="${W}" height="${H}" role="img" aria-label="relative error of each gradient against dt, log-log">
${yt}${xt}<text class="axis-label" x="${(L + W - R) / 2}" y="${H - 6}" text-anchor="middle">dt</text><text class="axis-label" x="${L + 6}" y="${T + 10}">relative error</text>${ref}${lines}</svg>`;
}
