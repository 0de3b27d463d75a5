// The derived-adjoint preview as HTML: equations typeset with KaTeX on the server side, so
// the webview runs no script at all and a standalone copy (report, screenshot) looks the
// same. The page is themed by VS Code's CSS variables, with light fallbacks outside it.
//
// Invariant: every piece of user text (model names, docstrings, notes) is HTML-escaped;
// LaTeX goes through katex.renderToString with `throwOnError: false` and `trust: false`.
// KaTeX is loaded on first use (`loadTypesetter`), not at start: it is a fifth of the bundle
// and the language server's first diagnostics do not need it. The build ships it as its own
// file (dist/katex.js, scripts/build.mjs).
import type Katex from 'katex';

let katex: typeof Katex | undefined;

/** Loads KaTeX once; call (and await) before `typeset` or anything that renders a model. */
export async function loadTypesetter(): Promise<void> {
  if (katex) return;
  const m = (await import('katex')) as unknown as { default?: typeof Katex } & typeof Katex;
  katex = m.default ?? m;
}

export interface PreviewRow { label: string; latex: string; note?: string }
export interface PreviewSection { title: string; note?: string; rows: PreviewRow[] }
export interface PreviewModel { name: string; badge: string; doc?: string; sections: PreviewSection[]; notes: string[] }

export interface PageOptions {
  title: string;
  /** href of katex.min.css (a webview URI inside VS Code, a relative path in a report). */
  katexCssHref: string;
  /** Webview CSP source (`webview.cspSource`); omitted for standalone pages. */
  cspSource?: string;
  nonce: string;
  /** Shown under the title, e.g. the file name and the derivation time. */
  subtitle?: string;
}

export function escapeHtml(s: string): string {
  return s.replace(/[&<>"']/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;', "'": '&#39;' })[c]!);
}

export function typeset(latex: string, display = true): string {
  if (!katex) throw new Error('typeset: the typesetter is not loaded (await loadTypesetter() first)');
  try {
    return katex.renderToString(latex, { displayMode: display, throwOnError: false, trust: false, strict: 'ignore', maxSize: 50, maxExpand: 1000, output: 'html' });
  } catch {
    return `<code>${escapeHtml(latex)}</code>`;
  }
}

export function renderModelsBody(models: PreviewModel[]): string {
  if (models.length === 0) return '<p class="empty">No well-formed neuron in this file yet: fix the errors shown in the editor and the derivation appears here.</p>';
  return models.map((m) => `
<section class="model">
  <h2>${escapeHtml(m.name)} <span class="badge">${escapeHtml(m.badge)}</span></h2>
  ${m.doc ? `<p class="doc">${escapeHtml(m.doc)}</p>` : ''}
  ${m.sections.map((s) => `
  <h3>${escapeHtml(s.title)}</h3>
  ${s.note ? `<p class="note">${escapeHtml(s.note)}</p>` : ''}
  <table class="eqs">${s.rows.map((r) => `
    <tr><th>${escapeHtml(r.label)}</th><td>${typeset(r.latex)}${r.note ? `<div class="note">${escapeHtml(r.note)}</div>` : ''}</td></tr>`).join('')}
  </table>`).join('')}
  ${m.notes.length ? `<ul class="notes">${m.notes.map((n) => `<li>${escapeHtml(n)}</li>`).join('')}</ul>` : ''}
</section>`).join('\n');
}

export function renderPage(body: string, o: PageOptions): string {
  // Inside VS Code: only the webview's own stylesheet and fonts, no script; KaTeX's inline
  // style attributes (struts, sizes) are allowed, since all text in them is KaTeX's own. A standalone page
  // (opened from disk, where browsers match no CSP source to file: URLs) forbids scripts,
  // plugins and forms, and lets its own folder's stylesheet and fonts load.
  const csp = o.cspSource
    ? `default-src 'none'; style-src ${o.cspSource} 'nonce-${o.nonce}'; style-src-attr 'unsafe-inline'; font-src ${o.cspSource}; img-src ${o.cspSource} data:;`
    : `script-src 'none'; object-src 'none'; base-uri 'none'; form-action 'none'; connect-src 'none';`;
  return `<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<meta http-equiv="Content-Security-Policy" content="${csp}">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>${escapeHtml(o.title)}</title>
<link rel="stylesheet" href="${escapeHtml(o.katexCssHref)}">
<style nonce="${o.nonce}">${STYLE}</style>
</head><body>
<header><h1>${escapeHtml(o.title)}</h1>${o.subtitle ? `<p class="sub">${escapeHtml(o.subtitle)}</p>` : ''}</header>
<main>${body}</main>
</body></html>`;
}

const STYLE = `
:root { --fg: var(--vscode-editor-foreground, #1d2330); --bg: var(--vscode-editor-background, #fbfaf7);
  --muted: var(--vscode-descriptionForeground, #5d6675); --rule: var(--vscode-panel-border, #d9d4c7);
  --accent: var(--vscode-textLink-foreground, #1f6f78); --badge: var(--vscode-badge-background, #e6efe9);
  --badge-fg: var(--vscode-badge-foreground, #1d4d3a); }
body { color: var(--fg); background: var(--bg); font-family: var(--vscode-font-family, system-ui, sans-serif);
  font-size: 14px; line-height: 1.45; margin: 0; padding: 16px 24px 40px; }
header h1 { font-size: 18px; margin: 0 0 2px; font-weight: 600; }
.sub { color: var(--muted); margin: 0 0 12px; font-size: 12px; }
.model { border-top: 2px solid var(--rule); padding-top: 8px; margin-top: 18px; }
h2 { font-size: 16px; margin: 4px 0; color: var(--accent); }
h3 { font-size: 13px; font-weight: 600; letter-spacing: .02em; color: var(--muted); margin: 14px 0 4px; }
.badge { font-size: 11px; font-weight: 500; padding: 1px 8px; border-radius: 9px; background: var(--badge); color: var(--badge-fg); vertical-align: middle; }
.doc, .note { color: var(--muted); margin: 2px 0 6px; font-size: 12px; }
table.eqs { border-collapse: collapse; width: 100%; }
table.eqs th { text-align: left; font-weight: 500; white-space: nowrap; padding: 4px 14px 4px 0; vertical-align: middle; width: 1%; font-size: 12px; color: var(--muted); }
table.eqs td { padding: 2px 0; }
table.eqs tr + tr td, table.eqs tr + tr th { border-top: 1px dotted var(--rule); }
.katex-display { margin: 4px 0; text-align: left; overflow-x: auto; overflow-y: hidden; padding: 2px 0; }
.katex-display > .katex { text-align: left; }
ul.notes { color: var(--muted); font-size: 12px; padding-left: 18px; }
.empty { color: var(--muted); }
table.plan { border-collapse: collapse; font-size: 12px; margin: 4px 0 8px; }
table.plan th, table.plan td { text-align: left; padding: 3px 12px 3px 0; border-top: 1px dotted var(--rule); vertical-align: top; }
figure { margin: 6px 0; } figure svg { max-width: 100%; height: auto; color: var(--fg); }
`;
