/**
 * Running median of a spectrum's lines: out[i] = median of a[i - half .. i + half] clipped to
 * lines 1..lastLine (line 0, DC, left out), for i = 1..topLine; with an even count, the mean of
 * the two middle values.
 *
 * Any exact method gives the same values. This one sorts the lines it needs once and gives each
 * its rank; the window is then a set of ranks with a pointer to its middle one, which moves by a
 * few ranks as one line enters and one leaves (a few operations a line instead of a sorted
 * insertion and removal). A window holding NaN, which no ordering places, takes the plain sorted
 * window instead. Nothing is allocated per call once the scratch has grown.
 */

let win = new Float64Array(64);
let sorted = new Float64Array(256);
let rankOf = new Int32Array(256);
let present = new Uint8Array(256);

export function runningMedian(a: Float64Array, half: number, topLine: number, lastLine: number, out: Float64Array): void {
  const last = Math.min(lastLine, topLine + half);
  if (last < 1) return;
  if (sorted.length < last) {
    sorted = new Float64Array(2 * last);
    rankOf = new Int32Array(2 * last + 2);
    present = new Uint8Array(2 * last);
  }
  for (let i = 1; i <= last; i++) {
    if (Number.isNaN(a[i])) return sortedWindowMedian(a, half, topLine, lastLine, out);
    sorted[i - 1] = a[i];
  }
  const v = sorted.subarray(0, last);
  v.sort();
  present.fill(0, 0, last);
  // Equal values take neighbouring ranks in any order: the median's value is the same.
  for (let i = 1; i <= last; i++) {
    let r = lowerBound(v, last, a[i]);
    while (present[r] === 1) r++;
    present[r] = 1;
    rankOf[i] = r;
  }
  present.fill(0, 0, last);
  let n = 0;
  let p = -1; // a present rank (the window's k-th smallest once adjusted)
  let below = 0; // present ranks below p
  let lo = 1; // window is [lo, hi)
  let hi = 1;
  for (let i = 1; i <= topLine; i++) {
    const wantLo = Math.max(1, i - half);
    const wantHi = Math.min(lastLine, i + half) + 1;
    while (hi < wantHi) {
      const r = rankOf[hi++];
      present[r] = 1;
      n++;
      if (p < 0) p = r;
      else if (r < p) below++;
    }
    while (lo < wantLo) {
      const r = rankOf[lo++];
      present[r] = 0;
      n--;
      if (r < p) below--;
      else if (r === p) {
        // p left: the next present rank up takes its place (below is unchanged), else the one down.
        let q = p + 1;
        while (q < last && present[q] === 0) q++;
        if (q < last) p = q;
        else {
          q = p - 1;
          while (present[q] === 0) q--;
          p = q;
          below--;
        }
      }
    }
    const k = (n - 1) >> 1;
    while (below > k) {
      p--;
      while (present[p] === 0) p--;
      below--;
    }
    while (below < k) {
      p++;
      while (present[p] === 0) p++;
      below++;
    }
    if (n % 2 === 1) out[i] = v[p];
    else {
      let q = p + 1;
      while (present[q] === 0) q++;
      out[i] = 0.5 * (v[p] + v[q]);
    }
  }
}

/** The same medians from a window kept sorted (binary search, then a shift). */
function sortedWindowMedian(a: Float64Array, half: number, topLine: number, lastLine: number, out: Float64Array): void {
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
