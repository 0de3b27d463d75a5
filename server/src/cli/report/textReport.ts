// The human-readable report of `saltus check`: per diagnostic one heading line
//   path:LINE:COL: severity code: message
// (LINE and COL 1-based; COL counts UTF-16 code units like every other Saltus output, so the
// location matches the editor's), the offending source line with a caret underline, related
// places and available fixes; then one summary line. ANSI colour only when io.colour says so.
// Invariants: output ends with a newline; no colour codes when colour is false; an underline
// is at least one caret and never runs past the end of the shown line.
import type { Diagnostic, Severity } from '../../base/diagnostic';
import { countSeverities, lineRange, type CheckedFile } from './checkedFile';

const MAX_SHOWN = 160; // code points of a source line shown before it is cut around the caret
const CONTEXT_BEFORE = 40;

interface Paint {
  severity(s: Severity, text: string): string;
  bold(text: string): string;
  dim(text: string): string;
}

const SEVERITY_SGR: Record<Severity, string> = { error: '1;91', warning: '1;33', info: '1;34', hint: '90' };
const colourPaint: Paint = {
  severity: (s, t) => `\x1b[${SEVERITY_SGR[s]}m${t}\x1b[0m`,
  bold: (t) => `\x1b[1m${t}\x1b[0m`,
  dim: (t) => `\x1b[2m${t}\x1b[0m`,
};
const plainPaint: Paint = { severity: (_s, t) => t, bold: (t) => t, dim: (t) => t };

/**
 * Terminal columns a code point takes: 0 for combining marks and zero-width joiners, 2 for
 * emoji shown as pictures and East Asian wide/fullwidth ranges (the common blocks, after
 * Unicode UAX #11; a heuristic, not the full table), else 1.
 */
export function columnWidth(ch: string): number {
  if (/^[\p{Mn}\p{Me}\u200B-\u200D\uFE0F]$/u.test(ch)) return 0;
  if (/^\p{Emoji_Presentation}$/u.test(ch)) return 2;
  const cp = ch.codePointAt(0) ?? 0;
  const wide = (cp >= 0x1100 && cp <= 0x115f) || (cp >= 0x2e80 && cp <= 0xa4cf && cp !== 0x303f) ||
    (cp >= 0xac00 && cp <= 0xd7a3) || (cp >= 0xf900 && cp <= 0xfaff) || (cp >= 0xfe30 && cp <= 0xfe4f) ||
    (cp >= 0xff00 && cp <= 0xff60) || (cp >= 0xffe0 && cp <= 0xffe6) || (cp >= 0x20000 && cp <= 0x3fffd);
  return wide ? 2 : 1;
}

/** Blank padding as wide as `chars` on a terminal, keeping tabs so they expand alike. */
function padFor(chars: string[]): string {
  return chars.map((c) => (c === '\t' ? '\t' : ' '.repeat(columnWidth(c)))).join('');
}

/**
 * The source line and its underline (UTF-16 character range [startChar, endChar) of the
 * line), cut around the caret when the line is long. Returns [shownLine, underline].
 */
export function excerpt(line: string, startChar: number, endChar: number): [string, string] {
  const start = Math.max(0, Math.min(startChar, line.length));
  const end = Math.max(start, Math.min(endChar, line.length));
  const chars = Array.from(line);
  const startCp = Array.from(line.slice(0, start)).length;
  const endCp = startCp + Array.from(line.slice(start, end)).length;
  let from = 0;
  let to = chars.length;
  if (chars.length > MAX_SHOWN) {
    from = Math.max(0, Math.min(startCp - CONTEXT_BEFORE, chars.length - MAX_SHOWN));
    to = Math.min(chars.length, from + MAX_SHOWN);
  }
  const lead = from > 0 ? '…' : '';
  const tail = to < chars.length ? '…' : '';
  const underlined = chars.slice(startCp, Math.min(endCp, to));
  const width = underlined.reduce((w, c) => w + (c === '\t' ? 1 : columnWidth(c)), 0);
  const carets = '^'.repeat(Math.max(1, width));
  return [lead + chars.slice(from, to).join('') + tail, (lead ? ' ' : '') + padFor(chars.slice(from, startCp)) + carets];
}

function location(file: CheckedFile, offset: number): string {
  const p = file.lines.positionAt(offset);
  return `${file.path}:${p.line + 1}:${p.character + 1}`;
}

function formatDiagnostic(file: CheckedFile, d: Diagnostic, paint: Paint): string {
  const r = lineRange(file, d.range);
  const out: string[] = [];
  out.push(`${paint.bold(location(file, d.range.start))}: ${paint.severity(d.severity, d.severity)} ${paint.dim(d.code)}: ${d.message}`);
  const lineStart = file.lines.lineStart(r.start.line);
  const lineText = file.text.slice(lineStart, file.lines.lineEnd(r.start.line));
  const endChar = r.end.line === r.start.line ? r.end.character : lineText.length;
  if (lineText.trim() !== '' || d.range.end > d.range.start) {
    const [shown, underline] = excerpt(lineText, r.start.character, endChar);
    out.push(`    ${shown}`);
    out.push(`    ${paint.severity(d.severity, underline)}`);
  }
  for (const rel of d.related ?? []) out.push(`  ${paint.dim('see')} ${location(file, rel.range.start)}: ${rel.message}`);
  for (const fix of d.fixes ?? []) out.push(`  ${paint.dim('fix')} ${fix.title}`);
  return out.join('\n');
}

function plural(n: number, word: string): string {
  return `${n} ${word}${n === 1 ? '' : 's'}`;
}

export function summaryLine(files: CheckedFile[]): string {
  const c = countSeverities(files);
  const parts = [plural(c.error, 'error'), plural(c.warning, 'warning')];
  if (c.info > 0) parts.push(`${c.info} info`);
  if (c.hint > 0) parts.push(plural(c.hint, 'hint'));
  return `${plural(files.length, 'file')} checked: ${parts.join(', ')}`;
}

export function textReport(files: CheckedFile[], colour: boolean): string {
  const paint = colour ? colourPaint : plainPaint;
  const blocks: string[] = [];
  for (const f of files) for (const d of f.diagnostics) blocks.push(formatDiagnostic(f, d, paint));
  blocks.push(summaryLine(files));
  return blocks.join('\n\n') + '\n';
}
