/**
 * A score of how well a spectrum's lines are focused at the harmonics of a given 1X: the
 * tachless tracker compares frames resampled for different ramp slopes by it (the right slope
 * gives the sharpest lines).
 */

/** Lines either side of a harmonic's line over which its power is summed, and its noise floor taken. */
const SHARP_HALF_LINES = 4;
const FLOOR_HALF_LINES = 12;

/** Scratch for the floor's median (one per process; the function is synchronous). */
const around = new Float64Array(2 * FLOOR_HALF_LINES + 1);

/**
 * How sharp the harmonic comb of 1X at (fractional) line `f1` is: for each harmonic, the share
 * of the power within SHARP_HALF_LINES that sits in its largest line (about 0.67 for a steady
 * sine under a Hann window, less when the line is smeared by a wrong warp), weighted by how far
 * the line stands out of the floor (0 below 2x the median of the lines around it, 1 from 16x
 * on).
 */
export function combSharpness(a: Float64Array, f1: number, harmonics: number): number {
  let score = 0;
  for (let k = 1; k <= harmonics; k++) {
    const c = Math.round(k * f1);
    if (c - SHARP_HALF_LINES < 1 || c + SHARP_HALF_LINES >= a.length) break;
    let peak = 0;
    for (let j = c - 1; j <= c + 1; j++) peak = Math.max(peak, a[j]);
    let local = 0;
    for (let j = c - SHARP_HALF_LINES; j <= c + SHARP_HALF_LINES; j++) local += a[j] * a[j];
    const weight = weightOf(a, Math.max(1, c - FLOOR_HALF_LINES), Math.min(a.length - 1, c + FLOOR_HALF_LINES), peak);
    if (local > 0) score += (weight * peak * peak) / local;
  }
  return score;
}

/**
 * How far the peak stands out of the floor (the upper median of a[from..to]): 0 at 2x the floor
 * or less, 1 at 16x or more, log2(peak / floor) / 3 - 1 / 3 between. Where the floor lies
 * clearly above half the peak or below a sixteenth of it, the weight (0 or 1) needs no median:
 * with the window sorted, s[k] <= x exactly when k + 1 values are <= x, s[k] >= x when n - k
 * are >= x (16 v and 2 v are exact), and the ratio's rounding keeps its side of 16 and 2.
 */
function weightOf(a: Float64Array, from: number, to: number, peak: number): number {
  if (peak > 0 && peak < Infinity) {
    const n = to - from + 1;
    const k = n >> 1;
    let low = 0;
    let high = 0;
    let nan = 0;
    for (let j = from; j <= to; j++) {
      const v = a[j];
      if (v * 16 <= peak) low++;
      if (v + v >= peak) high++;
      if (v !== v) nan++;
    }
    if (nan === 0) {
      if (low >= k + 1) return 1;
      if (high >= n - k) return 0;
    }
  }
  const floor = medianOf(a, from, to);
  return floor > 0 ? Math.min(1, Math.max(0, Math.log2(peak / floor) - 1) / 3) : 1;
}

/**
 * The upper median of a[from..to] (the middle value, the higher of the two middle ones for an
 * even count), by selection in the scratch (a partition about the middle of the part still in
 * question, as quicksort's, on the side that holds the rank): allocation-free, and the same value
 * as sorting the copy. A NaN, which no ordering places, takes the comparator sort the value was
 * first defined by.
 */
function medianOf(a: Float64Array, from: number, to: number): number {
  const n = to - from + 1;
  const s = around;
  for (let j = 0; j < n; j++) {
    const v = a[from + j];
    if (Number.isNaN(v)) {
      const copy = Array.from(a.subarray(from, to + 1));
      copy.sort((x, y) => x - y);
      return copy[n >> 1];
    }
    s[j] = v;
  }
  const k = n >> 1;
  let left = 0;
  let right = n - 1;
  while (right > left) {
    const pivot = s[(left + right) >>> 1];
    let i = left;
    let j = right;
    while (i <= j) {
      while (s[i] < pivot) i++;
      while (s[j] > pivot) j--;
      if (i <= j) {
        const t = s[i];
        s[i] = s[j];
        s[j] = t;
        i++;
        j--;
      }
    }
    // Now s[left..j] <= pivot <= s[i..right], and s[j + 1..i - 1] (if any) equal the pivot.
    if (k <= j) right = j;
    else if (k >= i) left = i;
    else break;
  }
  return s[k];
}
