// A unified diff of two texts by lines (Myers' O((N+M)D) algorithm, Myers 1986, Algorithmica
// 1:251; from memory), with three lines of context, as `diff -u` writes it. Used by `saltus
// migrate` to show a rewrite before anything is written.
// Invariants: pure; an empty string for equal texts; bounded by MAX_EDIT_DISTANCE (a larger
// change is shown as one hunk replacing everything between the common head and tail).

const CONTEXT = 3;
const MAX_EDIT_DISTANCE = 5000;

type Op = { kind: ' ' | '-' | '+'; line: string };

function splitLines(t: string): string[] {
  const lines = t.split(/\r\n|\r|\n/);
  if (lines[lines.length - 1] === '') lines.pop();
  return lines;
}

function myers(a: string[], b: string[]): Op[] | undefined {
  const n = a.length, m = b.length, max = n + m;
  const v = new Map<number, number>([[1, 0]]);
  const trace: Map<number, number>[] = [];
  for (let d = 0; d <= Math.min(max, MAX_EDIT_DISTANCE); d++) {
    trace.push(new Map(v));
    for (let k = -d; k <= d; k += 2) {
      let x = k === -d || (k !== d && (v.get(k - 1) ?? -1) < (v.get(k + 1) ?? -1)) ? v.get(k + 1)! : v.get(k - 1)! + 1;
      let y = x - k;
      while (x < n && y < m && a[x] === b[y]) { x++; y++; }
      v.set(k, x);
      if (x >= n && y >= m) return backtrack(a, b, trace, d);
    }
  }
  return undefined;
}

function backtrack(a: string[], b: string[], trace: Map<number, number>[], dEnd: number): Op[] {
  const ops: Op[] = [];
  let x = a.length, y = b.length;
  for (let d = dEnd; d >= 0; d--) {
    const v = trace[d]!;
    const k = x - y;
    const prevK = k === -d || (k !== d && (v.get(k - 1) ?? -1) < (v.get(k + 1) ?? -1)) ? k + 1 : k - 1;
    const prevX = v.get(prevK) ?? 0, prevY = prevX - prevK;
    while (x > prevX && y > prevY) { ops.push({ kind: ' ', line: a[--x]! }); y--; }
    if (d > 0) {
      if (x === prevX) ops.push({ kind: '+', line: b[--y]! });
      else ops.push({ kind: '-', line: a[--x]! });
    }
  }
  return ops.reverse();
}

/** Lines of `before` and `after` as operations: Myers, or head + replaced middle + tail when the change is large. */
function operations(a: string[], b: string[]): Op[] {
  const found = myers(a, b);
  if (found) return found;
  let head = 0;
  while (head < a.length && head < b.length && a[head] === b[head]) head++;
  let tail = 0;
  while (tail < a.length - head && tail < b.length - head && a[a.length - 1 - tail] === b[b.length - 1 - tail]) tail++;
  return [...a.slice(0, head).map((line): Op => ({ kind: ' ', line })), ...a.slice(head, a.length - tail).map((line): Op => ({ kind: '-', line })),
    ...b.slice(head, b.length - tail).map((line): Op => ({ kind: '+', line })), ...a.slice(a.length - tail).map((line): Op => ({ kind: ' ', line }))];
}

export function unifiedDiff(before: string, after: string, oldName: string, newName: string): string {
  if (before === after) return '';
  const a = splitLines(before), b = splitLines(after);
  const ops = operations(a, b);
  const out = [`--- ${oldName}`, `+++ ${newName}`];
  // positions of each op in both texts
  const pos: { ai: number; bi: number }[] = [];
  let ai = 0, bi = 0;
  for (const o of ops) { pos.push({ ai, bi }); if (o.kind !== '+') ai++; if (o.kind !== '-') bi++; }
  let i = 0;
  while (i < ops.length) {
    if (ops[i]!.kind === ' ') { i++; continue; }
    let start = Math.max(0, i - CONTEXT);
    let end = i;
    // extend while changes are within 2 * CONTEXT lines of each other
    for (;;) {
      while (end < ops.length && ops[end]!.kind !== ' ') end++;
      let next = end;
      while (next < ops.length && ops[next]!.kind === ' ') next++;
      if (next < ops.length && next - end <= 2 * CONTEXT) { end = next; continue; }
      end = Math.min(ops.length, end + CONTEXT);
      break;
    }
    const hunk = ops.slice(start, end);
    const oldCount = hunk.filter((o) => o.kind !== '+').length, newCount = hunk.filter((o) => o.kind !== '-').length;
    const oldStart = oldCount ? pos[start]!.ai + 1 : pos[start]!.ai, newStart = newCount ? pos[start]!.bi + 1 : pos[start]!.bi;
    out.push(`@@ -${oldStart},${oldCount} +${newStart},${newCount} @@`);
    for (const o of hunk) out.push(o.kind + o.line);
    i = end;
    start = end;
  }
  return out.join('\n') + '\n';
}
