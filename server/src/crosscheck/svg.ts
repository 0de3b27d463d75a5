// Inline SVG charts of our own for the cross-check page: a line chart (time traces with
// event steps, spike markers and an optional target line), a spike raster, and a small
// logarithmic error bar. No library, no script: plain elements styled by CSS classes the
// page defines (so a VS Code theme can recolour them), presentation attributes only.
//
// Invariants: every text that reaches the SVG goes through `esc`; NaN or infinite values
// break a line instead of drawing to the edge; an empty or flat series still gets a valid
// axis (a degenerate range is widened).

export const esc = (s: string): string =>
  s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);

const f1 = (x: number): string => (Math.round(x * 10) / 10).toString();

/** Round tick values (1, 2, 5 x 10^k) covering [lo, hi]. */
export function niceTicks(lo: number, hi: number, count = 5): number[] {
  if (!(hi > lo)) { const d = Math.abs(lo) > 0 ? Math.abs(lo) * 0.1 : 1; lo -= d; hi += d; }
  const raw = (hi - lo) / Math.max(1, count);
  const mag = Math.pow(10, Math.floor(Math.log10(raw)));
  const step = [1, 2, 2.5, 5, 10].map((m) => m * mag).find((s) => s >= raw) ?? 10 * mag;
  const out: number[] = [];
  for (let v = Math.ceil(lo / step) * step; v <= hi + step * 1e-9; v += step) out.push(Math.abs(v) < step * 1e-9 ? 0 : v);
  return out;
}

/** A tick label without float noise: 0.30000000000000004 -> '0.3'. */
export function tickLabel(v: number): string {
  if (v === 0) return '0';
  const s = Number(v.toPrecision(6)).toString();
  return s.includes('e') ? v.toExponential(1).replace('e+', 'e') : s;
}

/** A scientific number for tables: 4 significant digits. */
export function sci(v: number | null, digits = 4): string {
  if (v === null || !Number.isFinite(v)) return v === null ? '—' : String(v);
  if (v === 0) return '0';
  const a = Math.abs(v);
  return a >= 1e-3 && a < 1e4 ? Number(v.toPrecision(digits)).toString() : v.toExponential(digits - 1).replace('e+', 'e');
}

export interface Series { x: readonly number[]; y: readonly number[]; cls: string }

export interface LineChart {
  title: string;
  /** Axis labels with their units, e.g. 'time [ms]', 'V [mV]'. */
  xLabel: string;
  yLabel: string;
  xRange: [number, number];
  series: Series[];
  /** Vertical markers at these x (spike times). */
  markers?: readonly number[];
  /** A horizontal reference line (e.g. the loss target). */
  reference?: { y: number; label: string };
  width?: number;
  height?: number;
}

const M = { left: 62, right: 10, top: 24, bottom: 36 };

/** A power-of-ten factor for the y ticks when they are very small or large. */
function tickFactor(ticks: number[]): number {
  const m = Math.max(...ticks.map(Math.abs));
  if (!(m > 0)) return 0;
  const e = Math.floor(Math.log10(m));
  return e < -2 || e > 3 ? e : 0;
}

export function lineChart(c: LineChart): string {
  const W = c.width ?? 360, H = c.height ?? 170;
  const pw = W - M.left - M.right, ph = H - M.top - M.bottom;
  const [x0, x1] = c.xRange;
  let lo = Infinity, hi = -Infinity;
  for (const s of c.series) for (const v of s.y) if (Number.isFinite(v)) { lo = Math.min(lo, v); hi = Math.max(hi, v); }
  if (c.reference && Number.isFinite(c.reference.y)) { lo = Math.min(lo, c.reference.y); hi = Math.max(hi, c.reference.y); }
  if (!Number.isFinite(lo)) { lo = -1; hi = 1; }
  const yt = niceTicks(lo, hi, 4);
  const y0 = Math.min(lo, yt[0]!), y1 = Math.max(hi, yt[yt.length - 1]!);
  const ys = (v: number): number => M.top + ph - ((v - y0) / (y1 - y0 || 1)) * ph;
  const xs = (v: number): number => M.left + ((v - x0) / (x1 - x0 || 1)) * pw;
  const xt = niceTicks(x0, x1, 5).filter((v) => v >= x0 - 1e-12 && v <= x1 + 1e-12);
  const e = tickFactor(yt);
  const parts: string[] = [];
  parts.push(`<rect class="plot-bg" x="${M.left}" y="${M.top}" width="${pw}" height="${ph}"/>`);
  for (const v of yt) parts.push(`<line class="grid" x1="${M.left}" x2="${M.left + pw}" y1="${f1(ys(v))}" y2="${f1(ys(v))}"/><text class="tick" x="${M.left - 5}" y="${f1(ys(v) + 3.5)}" text-anchor="end">${esc(tickLabel(e ? v / Math.pow(10, e) : v))}</text>`);
  for (const v of xt) parts.push(`<line class="grid" x1="${f1(xs(v))}" x2="${f1(xs(v))}" y1="${M.top}" y2="${M.top + ph}"/><text class="tick" x="${f1(xs(v))}" y="${M.top + ph + 13}" text-anchor="middle">${esc(tickLabel(v))}</text>`);
  for (const t of c.markers ?? []) {
    const x = f1(xs(t));
    parts.push(`<line class="spike-line" x1="${x}" x2="${x}" y1="${M.top}" y2="${M.top + ph}"/><path class="spike-mark" d="M${x} ${M.top + 6}l-3.5 -6h7z"/>`);
  }
  if (c.reference && Number.isFinite(c.reference.y)) {
    const y = f1(ys(c.reference.y));
    parts.push(`<line class="reference" x1="${M.left}" x2="${M.left + pw}" y1="${y}" y2="${y}"/><text class="ref-label" x="${M.left + pw - 3}" y="${f1(ys(c.reference.y) - 3)}" text-anchor="end">${esc(c.reference.label)}</text>`);
  }
  for (const s of c.series) parts.push(polyline(s, xs, ys));
  parts.push(`<rect class="frame" x="${M.left}" y="${M.top}" width="${pw}" height="${ph}"/>`);
  parts.push(`<text class="chart-title" x="${M.left}" y="${M.top - 8}">${esc(c.title)}</text>`);
  parts.push(`<text class="axis-label" x="${M.left + pw / 2}" y="${H - 6}" text-anchor="middle">${esc(c.xLabel)}</text>`);
  const yl = e ? `${c.yLabel} ×1e${e}` : c.yLabel;
  parts.push(`<text class="axis-label" transform="translate(13 ${M.top + ph / 2}) rotate(-90)" text-anchor="middle">${esc(yl)}</text>`);
  return `<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" role="img" aria-label="${esc(c.title)}">${parts.join('')}</svg>`;
}

function polyline(s: Series, xs: (v: number) => number, ys: (v: number) => number): string {
  const runs: string[] = [];
  let cur: string[] = [];
  const n = Math.min(s.x.length, s.y.length);
  for (let k = 0; k < n; k++) {
    const x = s.x[k]!, y = s.y[k]!;
    if (!Number.isFinite(x) || !Number.isFinite(y)) { if (cur.length > 1) runs.push(cur.join(' ')); cur = []; continue; }
    cur.push(`${f1(xs(x))},${f1(ys(y))}`);
  }
  if (cur.length > 1) runs.push(cur.join(' '));
  return runs.map((p) => `<polyline class="${esc(s.cls)}" points="${p}"/>`).join('');
}

export interface RasterRow { label: string; times: readonly number[]; cls: string; targets?: readonly number[] }

/** One row per neuron, a tick per spike; rows grouped top to bottom as given. */
export function raster(rows: readonly RasterRow[], xRange: [number, number], xLabel: string, width = 1100): string {
  const rowH = 15, H = M.top + rows.length * rowH + M.bottom - 6, left = 90;
  const pw = width - left - M.right;
  const [x0, x1] = xRange;
  const xs = (v: number): number => left + ((v - x0) / (x1 - x0 || 1)) * pw;
  const parts: string[] = [`<rect class="plot-bg" x="${left}" y="${M.top}" width="${pw}" height="${rows.length * rowH}"/>`];
  for (const v of niceTicks(x0, x1, 10).filter((t) => t >= x0 - 1e-12 && t <= x1 + 1e-12)) {
    parts.push(`<line class="grid" x1="${f1(xs(v))}" x2="${f1(xs(v))}" y1="${M.top}" y2="${M.top + rows.length * rowH}"/><text class="tick" x="${f1(xs(v))}" y="${M.top + rows.length * rowH + 13}" text-anchor="middle">${esc(tickLabel(v))}</text>`);
  }
  rows.forEach((r, i) => {
    const yc = M.top + i * rowH + rowH / 2;
    parts.push(`<text class="tick" x="${left - 6}" y="${f1(yc + 3.5)}" text-anchor="end">${esc(r.label)}</text>`);
    for (const t of r.times) parts.push(`<line class="${esc(r.cls)}" x1="${f1(xs(t))}" x2="${f1(xs(t))}" y1="${f1(yc - 5.5)}" y2="${f1(yc + 5.5)}"/>`);
    for (const t of r.targets ?? []) parts.push(`<path class="target-mark" d="M${f1(xs(t))} ${f1(yc - 6)}l4.5 6l-4.5 6l-4.5 -6z"/>`);
  });
  parts.push(`<rect class="frame" x="${left}" y="${M.top}" width="${pw}" height="${rows.length * rowH}"/>`);
  parts.push(`<text class="axis-label" x="${left + pw / 2}" y="${H - 6}" text-anchor="middle">${esc(xLabel)}</text>`);
  return `<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="${width}" height="${H}" viewBox="0 0 ${width} ${H}" role="img" aria-label="spike raster">${parts.join('')}</svg>`;
}

/** A bar for a relative error on a log scale from 1e-12 (empty) to 1 (full), with the tolerance marked. */
export function errorBar(rel: number | null, tolerance: number): string {
  const W = 130, H = 12;
  const pos = (v: number): number => Math.max(0, Math.min(W, ((Math.log10(Math.max(v, 1e-12)) + 12) / 12) * W));
  const tol = f1(pos(tolerance));
  const bar = rel === null ? '' : `<rect class="${rel <= tolerance ? 'bar-ok' : 'bar-bad'}" x="0" y="2" width="${f1(Math.max(1, pos(rel)))}" height="${H - 4}"/>`;
  return `<svg class="bar" xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" viewBox="0 0 ${W} ${H}" aria-hidden="true"><rect class="bar-bg" x="0" y="2" width="${W}" height="${H - 4}"/>${bar}<line class="bar-tol" x1="${tol}" x2="${tol}" y1="0" y2="${H}"/></svg>`;
}
