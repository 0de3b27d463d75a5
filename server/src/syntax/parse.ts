// Entry point of the syntax stage: text -> { file, errors }. Never throws: lexer and
// parser errors become SyntaxErrors with ranges inside the text. Size and nesting limits
// (grammar.ts MAX_EXPR_NESTING, applied by nesting.ts before parsing; build.ts
// MAX_EXPR_DEPTH) give errors with code 'too-complex'. `tokens` are all lexed tokens, also
// those of a region cut out for being nested too deeply, or left out by recover.ts (a
// construct of the next language version). Documentation notes (`#~`) are attached to their
// declarations here (notes.ts).
import type { IToken } from 'chevrotain';
import type * as A from './ast';
import { buildFile, tokRange } from './build';
import { MAX_EXPR_NESTING, parserInstance } from './grammar';
import { cutTooDeep } from './nesting';
import { createLexer } from './tokens';
import type { Lexer } from 'chevrotain';
import { recoverTokens } from './recover';
import { attachNotes } from './notes';

export interface ParseOutput extends A.ParseResult {
  /** Jumps written outside a fire/incoming block (reported by the resolver). */
  strayJumps: A.Jump[];
  tokens: IToken[];
  /** `#~` notes that document no declaration. */
  strayNotes: A.Comment[];
}

let lexer: Lexer | undefined;

export function parse(text: string): ParseOutput {
  const errors: A.SyntaxError[] = [];
  const clamp = (r: A.Range): A.Range => {
    const start = Math.max(0, Math.min(r.start, text.length));
    return { start, end: Math.max(start, Math.min(r.end, text.length)) };
  };
  try {
    const lexed = (lexer ??= createLexer()).tokenize(text);
    for (const e of lexed.errors) {
      const ch = text.slice(e.offset, e.offset + Math.max(1, e.length));
      errors.push({ message: `unexpected character${ch.length > 1 ? 's' : ''} '${ch.length > 12 ? ch.slice(0, 12) + '…' : ch}'`, range: clamp({ start: e.offset, end: e.offset + Math.max(1, e.length) }) });
    }
    // The lexer tracks start offsets only; give each token its end so that chevrotain's node
    // locations carry an end offset too (build.ts then needs no walk of the subtree per node).
    for (const t of lexed.tokens) t.endOffset = t.startOffset + t.image.length - 1;
    const recovered = recoverTokens(lexed.tokens, text);
    for (const e of recovered.errors) errors.push({ ...e, range: clamp(e.range) });
    const cut = cutTooDeep(recovered.tokens, MAX_EXPR_NESTING);
    const tooDeepMessage = `expression nested too deeply (more than ${MAX_EXPR_NESTING} levels of parentheses, signs or exponents); this part is not checked: name parts of it with 'let'`;
    for (const r of cut.regions) errors.push({ code: 'too-complex', range: clamp({ start: r.first.startOffset, end: tokRange(r.last).end }), message: tooDeepMessage });
    const parser = parserInstance();
    parser.input = cut.tokens;
    const cst = parser.file();
    const tooDeep = parser.tooDeep;
    if (tooDeep && Number.isFinite(tooDeep.startOffset)) errors.push({ code: 'too-complex', range: clamp(tokRange(tooDeep)), message: tooDeepMessage });
    for (const e of parser.errors) {
      // The parser's own complaint at the token where the nesting limit stopped it says nothing useful.
      if (tooDeep && e.token === tooDeep) continue;
      let r: A.Range;
      if (Number.isFinite(e.token.startOffset) && e.token.tokenType.name !== 'EOF') r = tokRange(e.token);
      else {
        const prev = (e as { previousToken?: IToken }).previousToken;
        const at = prev && Number.isFinite(prev.startOffset) ? tokRange(prev).end : text.length;
        r = { start: Math.max(0, at - 1), end: at };
      }
      errors.push({ message: e.message, range: clamp(r) });
    }
    const comments: A.Comment[] = (lexed.groups.comments ?? []).map((t) => ({ text: t.image, range: tokRange(t) }));
    const { file, strayJumps, limitErrors } = buildFile(cst, text);
    for (const e of limitErrors) errors.push({ ...e, range: clamp(e.range) });
    file.comments = comments;
    const notes = attachNotes(file, lexed.tokens, text);
    return { file, errors, strayJumps, tokens: lexed.tokens, strayNotes: notes.stray };
  } catch (err) {
    // A defect in the parser must not take the editor down: report it as a syntax error.
    errors.push({ message: `internal parser error: ${(err as Error).message}`, range: clamp({ start: 0, end: Math.min(1, text.length) }) });
    return { file: { kind: 'file', items: [], comments: [], range: { start: 0, end: text.length } }, errors, strayJumps: [], tokens: [], strayNotes: [] };
  }
}
