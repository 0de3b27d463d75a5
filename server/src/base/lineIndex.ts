// Offsets <-> 0-based (line, character) positions, counting characters in UTF-16 code
// units as LSP does (JavaScript string indices already are UTF-16). Lines end at \n, \r\n
// or a lone \r.

export interface Position { line: number; character: number }

export class LineIndex {
  private readonly starts: number[] = [0];
  constructor(private readonly text: string) {
    for (let i = 0; i < text.length; i++) {
      const c = text.charCodeAt(i);
      if (c === 13 /* \r */) { if (text.charCodeAt(i + 1) === 10) i++; this.starts.push(i + 1); }
      else if (c === 10) this.starts.push(i + 1);
    }
  }
  get lineCount(): number { return this.starts.length; }
  lineStart(line: number): number { return this.starts[Math.max(0, Math.min(line, this.starts.length - 1))]!; }
  /** End of a line's content (before its line break). */
  lineEnd(line: number): number {
    if (line + 1 >= this.starts.length) return this.text.length;
    let e = this.starts[line + 1]!;
    if (this.text.charCodeAt(e - 1) === 10) e--;
    if (this.text.charCodeAt(e - 1) === 13) e--;
    return e;
  }
  positionAt(offset: number): Position {
    const o = Math.max(0, Math.min(offset, this.text.length));
    let lo = 0, hi = this.starts.length - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (this.starts[mid]! <= o) lo = mid; else hi = mid - 1;
    }
    return { line: lo, character: o - this.starts[lo]! };
  }
  offsetAt(p: Position): number {
    if (p.line < 0) return 0;
    if (p.line >= this.starts.length) return this.text.length;
    return Math.min(this.lineStart(p.line) + Math.max(0, p.character), this.lineEnd(p.line));
  }
}
