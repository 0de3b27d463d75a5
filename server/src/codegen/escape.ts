// Text from the model (names, docstrings, unit texts, printed formulas) placed into comments
// and string literals of generated code. Docstrings are the modeller's free text, so nothing
// in them may end a comment, start a line, splice lines or close a string:
//   - control characters (newlines, carriage returns, tabs, NUL...), Unicode line and
//     paragraph separators and format characters become one space;
//   - in C/CUDA comments, `*/` and `/*` are split (`* /`, `/ *`), `??` is split (no
//     trigraphs: `??/` would splice lines) and a backslash becomes `\\` followed by nothing
//     that could join lines (comment lines never end with model text, see `commentText`);
//   - in Python comments nothing else is needed once line breaks are gone;
//   - in string literals backslashes and quotes are escaped (and in C every `?`, against trigraphs).
// Invariant: the results contain no line break and no character below U+0020.

const BREAKING = /[\u0000-\u001f\u007f-\u009f\u00ad\u061c\u180e\u200b-\u200f\u2028-\u202e\u2060-\u2064\u2066-\u206f\ufeff\ufff9-\ufffb]/g;

/** One line of free text: control and invisible format characters become spaces; trimmed. */
export function oneLine(text: string, maxLength = 300): string {
  const s = text.replace(BREAKING, ' ').replace(/ {2,}/g, ' ').trim();
  return s.length > maxLength ? s.slice(0, maxLength - 3) + '...' : s;
}

/** Safe inside a C/CUDA block comment or a `//` comment (always followed by more text on its line). */
export function cComment(text: string, maxLength?: number): string {
  return oneLine(text, maxLength)
    .replace(/\\/g, '\\\\')
    .replace(/\*\//g, '* /')
    .replace(/\/\*/g, '/ *')
    .replace(/\?\?/g, '? ?')
    .replace(/\?\?/g, '? ?');
}

/** Safe inside a Python `#` comment. */
export function pyComment(text: string, maxLength?: number): string {
  return oneLine(text, maxLength);
}

/** The body of a double-quoted C string literal (no surrounding quotes); `\?` stops trigraphs. */
export function cStringBody(text: string, maxLength?: number): string {
  return oneLine(text, maxLength).replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/\?/g, '\\?');
}

/** The body of a quoted Python string literal, single or triple quoted (no surrounding quotes). */
export function pyStringBody(text: string, maxLength?: number): string {
  return oneLine(text, maxLength).replace(/\\/g, '\\\\').replace(/"/g, '\\"').replace(/'/g, "\\'");
}

/** A model docstring for a comment: `"text"` quoted, or empty when there is none. */
export function quotedDoc(doc: string | undefined, comment: (s: string) => string): string {
  return doc && oneLine(doc) ? ` "${comment(doc)}"` : '';
}
