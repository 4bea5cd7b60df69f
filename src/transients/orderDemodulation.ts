/**
 * Complex amplitude of one order over a Hann-weighted window of uniformly sampled data, with
 * the shaft angle known at every sample. The capture (measured samples, sensorCapture.ts) and
 * identification's model (sweptResponse.ts) form the same products and average them with the
 * same weights (`hannWeights`), so both see exactly the same averaging; `demodulateOrder` is the
 * plain form of it, for reference and tests.
 *
 * For x(t) = A cos(2 pi k theta(t) - phi), theta in revolutions,
 *   c = 2 sum w_n x_n exp(-j 2 pi k theta_n) / sum w_n  ~=  A exp(-j phi)
 * The second product term turns at twice the order frequency and averages out; because the
 * reference follows the measured angle, a ramping order stays at zero frequency (no smearing),
 * and other orders, at least one shaft frequency away, fall on the window's sidelobes when the
 * window spans at least two revolutions (the Hann main lobe is +-2 / T wide).
 */

/** Hann weight of sample `n` of a window of `length` samples (symmetric, zero at both ends excluded). */
function hann(n: number, length: number): number {
  return 0.5 - 0.5 * Math.cos((2 * Math.PI * (n + 1)) / (length + 1));
}

/** Hann weights of a window of `length` samples and their sum, kept per length. */
const weightTables = new Map<number, { w: Float64Array; sum: number }>();

export function hannWeights(length: number): { w: Float64Array; sum: number } {
  let t = weightTables.get(length);
  if (!t) {
    const w = new Float64Array(length);
    let sum = 0;
    for (let n = 0; n < length; n++) sum += w[n] = hann(n, length);
    if (weightTables.size >= 16) weightTables.delete(weightTables.keys().next().value as number);
    t = { w, sum };
    weightTables.set(length, t);
  }
  return t;
}


/**
 * The complex amplitude [re, im] of order `multiple` over samples [from, to) of `x` with shaft
 * angle `revs` (revolutions); NaN when any angle in the window is unknown (NaN).
 */
export function demodulateOrder(
  x: ArrayLike<number>,
  revs: ArrayLike<number>,
  from: number,
  to: number,
  multiple: number,
): [number, number] {
  const length = to - from;
  let re = 0;
  let im = 0;
  let wSum = 0;
  const w0 = 2 * Math.PI * multiple;
  const { w: hw, sum } = hannWeights(length);
  for (let n = 0; n < length; n++) {
    const theta = revs[from + n];
    if (Number.isNaN(theta)) return [Number.NaN, Number.NaN];
    const w = hw[n] * x[from + n];
    // Only the fractional part matters; taking it keeps the argument small on long runs.
    const a = w0 * (theta - Math.floor(theta));
    re += w * Math.cos(a);
    im -= w * Math.sin(a);
  }
  wSum = sum;
  return [(2 * re) / wSum, (2 * im) / wSum];
}

/** The phasor step of `demodulateFixed` at `freqHz` and `rateHz`: [cos, sin] of one sample's turn. */
export function fixedStep(freqHz: number, rateHz: number): [number, number] {
  const da = (2 * Math.PI * freqHz) / rateHz;
  return [Math.cos(da), Math.sin(da)];
}

/**
 * The complex amplitude of a fixed frequency over samples [from, to) sampled at `rateHz`, the
 * phase taken against the first sample's time `t0S` so that windows line up on one clock.
 * `step`: fixedStep(freqHz, rateHz), where the caller keeps it (the same numbers either way).
 */
export function demodulateFixed(
  x: ArrayLike<number>,
  from: number,
  to: number,
  freqHz: number,
  rateHz: number,
  t0S: number,
  step: readonly [number, number] = fixedStep(freqHz, rateHz),
): [number, number] {
  const { w, sum } = hannWeights(to - from);
  const c0 = freqHz * t0S;
  const a0 = 2 * Math.PI * (c0 - Math.floor(c0));
  // The reference turns by a fixed step: rotate a phasor instead of two sines per sample.
  let c = Math.cos(a0);
  let sn = Math.sin(a0);
  const [dc, ds] = step;
  let re = 0;
  let im = 0;
  for (let n = 0; n < w.length; n++) {
    const v = w[n] * x[from + n];
    re += v * c;
    im -= v * sn;
    const cn = c * dc - sn * ds;
    sn = sn * dc + c * ds;
    c = cn;
  }
  return [(2 * re) / sum, (2 * im) / sum];
}
