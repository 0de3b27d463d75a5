// "Did you mean ...?" for unknown names: the closest candidates by edit distance, accepted
// when the distance is small relative to the name's length. Ties are all offered (a fix
// each) rather than one picked by declaration order.
import type { Range } from '../syntax/ast';
import type { Diagnostic, Fix } from '../base/diagnostic';

export function editDistance(a: string, b: string): number {
  if (a === b) return 0;
  const m = a.length, n = b.length;
  let prev = Array.from({ length: n + 1 }, (_, j) => j);
  for (let i = 1; i <= m; i++) {
    const cur = [i];
    for (let j = 1; j <= n; j++) {
      const cost = a[i - 1] === b[j - 1] ? 0 : a[i - 1]!.toLowerCase() === b[j - 1]!.toLowerCase() ? 0.5 : 1;
      cur[j] = Math.min(prev[j]! + 1, cur[j - 1]! + 1, prev[j - 1]! + cost);
    }
    prev = cur;
  }
  return prev[n]!;
}

/** The nearest candidates (all those tied for nearest, at most three), or none when nothing is near. */
export function suggestions(name: string, candidates: Iterable<string>): string[] {
  let best: string[] = [];
  let bestD = Infinity;
  for (const c of new Set(candidates)) {
    const d = editDistance(name, c);
    if (d < bestD) { bestD = d; best = [c]; } else if (d === bestD) best.push(c);
  }
  const limit = Math.max(1, Math.min(3, Math.floor(name.length / 3)));
  return bestD <= limit ? best.slice(0, 3) : [];
}

const quoted = (xs: string[]): string => xs.map((x) => `'${x}'`).join(xs.length === 2 ? ' or ' : ', ');

/** An `unknown-name` error with "did you mean" wording and one replacement fix per suggestion. */
export function unknownName(range: Range, message: string, guesses: string[], otherwise = ''): Diagnostic {
  const fixes: Fix[] = guesses.map((g, i) => ({ title: `Change to '${g}'`, edits: [{ range, newText: g }], preferred: i === 0 && guesses.length === 1 }));
  return {
    severity: 'error', code: 'unknown-name', range,
    message: message + (guesses.length ? `; did you mean ${quoted(guesses)}?` : otherwise),
    ...(fixes.length ? { fixes } : {}),
  };
}
