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
  const sorted = [...edits].map((e, i) => ({ e, i })).sort((x, y) => y.e.range.start - x.e.range.start || y.i - x.i);
  let out = text;
  for (const { e } of sorted) out = out.slice(0, e.range.start) + e.newText + out.slice(e.range.end);
  return out;
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
 * The `quoted-docstring` hints (deprecated form, each with a fix rewriting it, and one for the
 * whole file) and the `stray-note` hints of a parsed file.
 */
export function docFormDiagnostics(text: string, parsed: ParseOutput): Diagnostic[] {
  const out: Diagnostic[] = [];
  const quoted = documentedDecls(parsed.file).filter((d) => d.quotedDoc);
  if (quoted.length) {
    const lines = new LineIndex(text);
    const whole = quoted.length > 1 ? migrateText(text, parsed) : undefined;
    const wholeFix: Fix | undefined = whole && !whole.problem
      ? { title: `Rewrite all ${quoted.length} quoted docstrings of this file as ${NOTE_MARKER} notes`, edits: allEdits(text, parsed) }
      : undefined;
    for (const d of quoted) {
      const q = d.quotedDoc!;
      const edits = quotedDocEdits(text, lines, d);
      out.push({ severity: 'hint', code: 'quoted-docstring', range: q.range, tags: ['deprecated'],
        message: `a quoted docstring is the old form of documentation: write it as a note, '${NOTE_MARKER} ${q.text.length > 40 ? q.text.slice(0, 37) + '...' : q.text}', at the end of the line or on the line above (saltus migrate rewrites whole files)`,
        fixes: [{ title: `Rewrite as a ${NOTE_MARKER} note`, edits, preferred: true }, ...(wholeFix ? [wholeFix] : [])] });
    }
  }
  for (const c of parsed.strayNotes) {
    out.push({ severity: 'hint', code: 'stray-note', range: c.range,
      message: `this ${NOTE_MARKER} note documents nothing: a note goes on the line right above a neuron, param, state, let or incoming declaration, or at the end of its line; use '#' for other comments` });
  }
  return out;
}
