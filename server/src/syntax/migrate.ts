// The deprecated quoted docstrings (`param tau = 5 [ms] "text"`) and their way out: the
// `quoted-docstring` hint on each (with a fix for it and one for the whole file), the
// `stray-note` hint on a `#~` note that documents nothing, and `migrateText`, which rewrites
// every quoted docstring of a file as a note (notes.ts) and checks the result: the same
// tokens but the docstrings, no new syntax error, and every declaration documented exactly as
// before. `saltus migrate` and the quick fixes use it.
// Invariants: pure; never throws; a rewrite that fails its check is not offered.
import type { Diagnostic, Fix, TextEdit } from '../base/diagnostic';
import { LineIndex } from '../base/lineIndex';
import { parse, type ParseOutput } from './parse';
import { NOTE_MARKER, documentedDecls, quotedDocEdits } from './notes';

export interface Migration {
  /** The rewritten text (the input when nothing changed or the rewrite was refused). */
  text: string;
  /** How many quoted docstrings were rewritten. */
  rewritten: number;
  /** Why the rewrite was refused (the text is then unchanged). */
  problem?: string;
}

/** Applies non-overlapping edits (offsets into `text`), the later ones first. */
export function applyTextEdits(text: string, edits: readonly TextEdit[]): string {
  // One pass front to back (slicing the whole text once per edit was quadratic); edits at the
  // same offset keep their given order, as when they were applied from the end backwards.
  const sorted = [...edits].map((e, i) => ({ e, i })).sort((x, y) => x.e.range.start - y.e.range.start || x.i - y.i);
  const parts: string[] = [];
  let at = 0;
  for (const { e } of sorted) {
    if (e.range.start >= at) parts.push(text.slice(at, e.range.start));
    parts.push(e.newText);
    at = Math.max(at, e.range.end);
  }
  parts.push(text.slice(at));
  return parts.join('');
}

/** Every rewrite edit of the file, in text order. */
function allEdits(text: string, parsed: ParseOutput): TextEdit[] {
  const lines = new LineIndex(text);
  return documentedDecls(parsed.file).flatMap((d) => quotedDocEdits(text, lines, d));
}

/** What the check compares: each declaration's kind, name and shown documentation. */
function docsOf(parsed: ParseOutput): string[] {
  return documentedDecls(parsed.file).map((d) => {
    const name = d.kind === 'incoming' ? d.weight?.name : d.name?.name;
    return `${d.kind} ${name ?? '?'}: ${d.doc?.text ?? ''}`;
  });
}

/** Rewrites every quoted docstring of `text` as a note, or says why it did not. */
export function migrateText(text: string, parsed: ParseOutput = parse(text)): Migration {
  const edits = allEdits(text, parsed);
  const count = documentedDecls(parsed.file).filter((d) => d.quotedDoc).length;
  if (count === 0) return { text, rewritten: 0 };
  const out = applyTextEdits(text, edits);
  const problem = checkRewrite(parsed, parse(out));
  return problem ? { text, rewritten: 0, problem } : { text: out, rewritten: count };
}

function checkRewrite(before: ParseOutput, after: ParseOutput): string | undefined {
  if (after.errors.length > before.errors.length) return `the rewritten text would have a syntax error (${after.errors[0]?.message ?? '?'})`;
  const code = (p: ParseOutput): string => p.tokens.filter((t) => t.tokenType.name !== 'StringLiteral').map((t) => t.image).join(' ');
  if (code(before) !== code(after)) return 'the rewrite would change more than the docstrings';
  if (documentedDecls(after.file).some((d) => d.quotedDoc)) return 'a quoted docstring would remain';
  const a = docsOf(before), b = docsOf(after);
  const i = a.findIndex((x, k) => x !== b[k]);
  if (i >= 0 || a.length !== b.length) return `the documentation would change (${a[i] ?? b[i] ?? 'a declaration'})`;
  return undefined;
}

/**
 * The fix that rewrites every quoted docstring of the file as a note (when there are at least
 * two and the rewrite passes its check), or undefined. Offered by the code actions on a
 * `quoted-docstring` hint (outputs/codeActions.ts `quickFixes`, the language server's quick
 * fixes), computed when asked: it is not carried by each diagnostic, because its edits span the
 * whole file (one copy per hint made publishing quadratic in the file's size) and its check
 * parses the rewritten file again.
 */
export function rewriteAllFix(text: string, parsed: ParseOutput): Fix | undefined {
  const count = documentedDecls(parsed.file).filter((d) => d.quotedDoc).length;
  if (count < 2) return undefined;
  const whole = migrateText(text, parsed);
  return whole.problem ? undefined
    : { title: `Rewrite all ${count} quoted docstrings of this file as ${NOTE_MARKER} notes`, edits: allEdits(text, parsed) };
}

/**
 * The `quoted-docstring` hints (deprecated form, each with a fix rewriting it; the rewrite of
 * all of them is `rewriteAllFix`) and the `stray-note` hints of a parsed file. Each hint
 * depends only on its own declaration or note (and the file's first line break), so that a
 * re-analysis of one block (incremental.ts) computes the same hints as the whole file.
 */
export function docFormDiagnostics(text: string, parsed: ParseOutput): Diagnostic[] {
  const out: Diagnostic[] = [];
  const quoted = documentedDecls(parsed.file).filter((d) => d.quotedDoc);
  if (quoted.length) {
    const lines = new LineIndex(text);
    for (const d of quoted) {
      const q = d.quotedDoc!;
      const edits = quotedDocEdits(text, lines, d);
      out.push({ severity: 'hint', code: 'quoted-docstring', range: q.range, tags: ['deprecated'],
        message: `a quoted docstring is the old form of documentation: write it as a note, '${NOTE_MARKER} ${q.text.length > 40 ? q.text.slice(0, 37) + '...' : q.text}', at the end of the line or on the line above (saltus migrate rewrites whole files)`,
        fixes: [{ title: `Rewrite as a ${NOTE_MARKER} note`, edits, preferred: true }] });
    }
  }
  for (const c of parsed.strayNotes) {
    out.push({ severity: 'hint', code: 'stray-note', range: c.range,
      message: `this ${NOTE_MARKER} note documents nothing: a note goes on the line right above a neuron, param, state, let or incoming declaration, or at the end of its line; use '#' for other comments` });
  }
  return out;
}
