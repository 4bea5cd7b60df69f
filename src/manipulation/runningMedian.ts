/**
 * Running median of a spectrum's lines: out[i] = median of a[i - half .. i + half] clipped to
 * lines 1..lastLine (line 0, DC, left out), for i = 1..topLine; with an even count, the mean of
 * the two middle values.
 *
 * The window is kept sorted in a typed array (binary search, then a shift of at most 2 half + 1
 * values), which is the same sorted window, and so the same median, as any other exact method;
 * nothing is allocated per call once the scratch has grown.
 */

let win = new Float64Array(64);

export function runningMedian(a: Float64Array, half: number, topLine: number, lastLine: number, out: Float64Array): void {
  if (win.length < 2 * half + 2) win = new Float64Array(2 * half + 2);
  const w = win;
  let n = 0;
  let lo = 1; // window is [lo, hi)
  let hi = 1;
  for (let i = 1; i <= topLine; i++) {
    const wantLo = Math.max(1, i - half);
    const wantHi = Math.min(lastLine, i + half) + 1;
    while (hi < wantHi) {
      const v = a[hi++];
      const at = lowerBound(w, n, v);
      for (let k = n; k > at; k--) w[k] = w[k - 1];
      w[at] = v;
      n++;
    }
    while (lo < wantLo) {
      const at = lowerBound(w, n, a[lo++]);
      // Past the end (only for a value no comparison can place, NaN) nothing is removed.
      if (at < n) {
        n--;
        for (let k = at; k < n; k++) w[k] = w[k + 1];
      }
    }
    out[i] = n % 2 === 1 ? w[(n - 1) / 2] : 0.5 * (w[n / 2 - 1] + w[n / 2]);
  }
}

/** First index of w[0..n) whose value is not below v. */
function lowerBound(w: Float64Array, n: number, v: number): number {
  let lo = 0;
  let hi = n;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (w[mid] < v) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}
