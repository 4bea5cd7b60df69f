/**
 * "Did you mean" for an unknown key: the allowed key that matches once case, '-' and '_' are
 * ignored (fnHz, fn-hz -> fn_hz), else the nearest by edit distance when it is close enough to
 * be a typo (at most 1 edit for keys up to 4 letters, 2 beyond).
 */
export function suggestKey(found: string, allowed: readonly string[]): string | undefined {
  const squash = (s: string) => s.toLowerCase().replace(/[-_\s]/g, '');
  const target = squash(found);
  const same = allowed.find((k) => squash(k) === target);
  if (same !== undefined) return same;
  const limit = found.length <= 4 ? 1 : 2;
  let best: string | undefined;
  let bestDistance = Infinity;
  for (const k of allowed) {
    const d = editDistance(found.toLowerCase(), k.toLowerCase());
    if (d < bestDistance) {
      bestDistance = d;
      best = k;
    }
  }
  return bestDistance <= limit ? best : undefined;
}

/** Levenshtein distance with adjacent transposition counted as one edit (optimal string alignment). */
export function editDistance(a: string, b: string): number {
  const rows = a.length + 1;
  const cols = b.length + 1;
  const d: number[][] = Array.from({ length: rows }, (_, i) => Array.from({ length: cols }, (_, j) => (i === 0 ? j : j === 0 ? i : 0)));
  for (let i = 1; i < rows; i++) {
    for (let j = 1; j < cols; j++) {
      const cost = a[i - 1] === b[j - 1] ? 0 : 1;
      let v = Math.min(d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + cost);
      if (i > 1 && j > 1 && a[i - 1] === b[j - 2] && a[i - 2] === b[j - 1]) v = Math.min(v, d[i - 2][j - 2] + 1);
      d[i][j] = v;
    }
  }
  return d[a.length][b.length];
}
