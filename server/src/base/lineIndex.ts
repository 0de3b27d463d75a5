// Offsets <-> 0-based (line, character) positions, counting characters in UTF-16 code
// units as LSP does (JavaScript string indices already are UTF-16). Lines end at \n, \r\n
// or a lone \r.

export interface Position { line: number; character: number }

export class LineIndex {
  private readonly starts: number[] = [0];
  constructor(private readonly text: string, starts?: number[]) {
    if (starts) { this.starts = starts; return; }
    this.scan(0, text.length);
  }

  /** Pushes the line starts of the breaks met scanning from `from` until `until`; returns where it stopped. */
  private scan(from: number, until: number): number {
    const text = this.text;
    let i = from;
    for (; i < until && i < text.length; i++) {
      const c = text.charCodeAt(i);
      if (c === 13 /* \r */) { if (text.charCodeAt(i + 1) === 10) i++; this.starts.push(i + 1); }
      else if (c === 10) this.starts.push(i + 1);
    }
    return i;
  }

  /**
   * The index of `text`, which differs from the text of `before` only in that [from, oldEnd)
   * became [from, newEnd): the lines before and after the change are taken over (shifted), only
   * the changed part is scanned. Equal to `new LineIndex(text)`.
   */
  static edited(before: LineIndex, text: string, from: number, oldEnd: number, newEnd: number): LineIndex {
    const old = before.starts;
    const lo = Math.max(0, from - 1);
    let k = 0;
    while (k < old.length && old[k]! <= lo) k++; // starts up to lo are unchanged (their breaks end before from - 1)
    const out = new LineIndex(text, old.slice(0, k));
    const stopped = out.scan(lo, newEnd + 2);
    const delta = newEnd - oldEnd;
    let j = k;
    while (j < old.length && old[j]! + delta <= stopped) j++;
    for (; j < old.length; j++) out.starts.push(old[j]! + delta);
    return out;
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
