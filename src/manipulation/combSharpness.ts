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
    const from = Math.max(1, c - FLOOR_HALF_LINES);
    const to = Math.min(a.length - 1, c + FLOOR_HALF_LINES);
    const floor = medianOf(a, from, to);
    const weight = floor > 0 ? Math.min(1, Math.max(0, Math.log2(peak / floor) - 1) / 3) : 1;
    if (local > 0) score += (weight * peak * peak) / local;
  }
  return score;
}

/**
 * The upper median of a[from..to] (the middle value, the higher of the two middle ones for an
 * even count), by insertion into the sorted scratch: allocation-free, and the same value as
 * sorting the copy. A NaN, which no ordering places, takes the comparator sort the value was
 * first defined by.
 */
function medianOf(a: Float64Array, from: number, to: number): number {
  const n = to - from + 1;
  for (let j = from; j <= to; j++) {
    const v = a[j];
    if (Number.isNaN(v)) {
      const copy = Array.from(a.subarray(from, to + 1));
      copy.sort((x, y) => x - y);
      return copy[n >> 1];
    }
    let k = j - from;
    while (k > 0 && around[k - 1] > v) {
      around[k] = around[k - 1];
      k--;
    }
    around[k] = v;
  }
  return around[n >> 1];
}
