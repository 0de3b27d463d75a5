// "Did you mean ...?" for unknown names: the closest candidate by edit distance,
// accepted when the distance is small relative to the name's length.

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

export function closest(name: string, candidates: Iterable<string>): string | undefined {
  let best: string | undefined;
  let bestD = Infinity;
  for (const c of candidates) {
    const d = editDistance(name, c);
    if (d < bestD) { bestD = d; best = c; }
  }
  const limit = Math.max(1, Math.min(3, Math.floor(name.length / 3)));
  return best !== undefined && bestD <= limit ? best : undefined;
}
