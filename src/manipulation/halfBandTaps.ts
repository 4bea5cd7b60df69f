/**
 * The half-band stage's filter (decimator.ts): 59 taps, a windowed sinc cut off at a quarter of
 * the stage's input rate, Kaiser window beta = 9. Every even-offset tap but the centre is zero and
 * the centre is 1/2, so a stage needs only the 15 side taps at odd offsets 1, 3, ..., 29.
 */
export const TAPS = 59;
export const HALF = (TAPS - 1) / 2; // 29
const KAISER_BETA = 9;

/** Modified Bessel function of the first kind, order 0, by its power series (converges fast for x < 30). */
function besselI0(x: number): number {
  let term = 1;
  let sum = 1;
  const q = (x * x) / 4;
  for (let k = 1; k < 60; k++) {
    term *= q / (k * k);
    sum += term;
    if (term < sum * 1e-17) break;
  }
  return sum;
}

/**
 * Non-zero side taps h[d] for odd offsets d = 1, 3, ..., 29 from the centre:
 * h[d] = 0.5 sinc(d / 2) kaiser(d), then scaled so that 0.5 + 2 sum(h) = 1 (unit gain at DC),
 * which keeps the half-band identity H(f) + H(fs/2 - f) = 1.
 */
function halfBandSideTaps(): Float64Array {
  const side = new Float64Array((HALF + 1) / 2);
  let sum = 0;
  for (let j = 0; j < side.length; j++) {
    const d = 2 * j + 1;
    const sinc = Math.sin((Math.PI * d) / 2) / ((Math.PI * d) / 2);
    const kaiser = besselI0(KAISER_BETA * Math.sqrt(1 - (d / HALF) ** 2)) / besselI0(KAISER_BETA);
    side[j] = 0.5 * sinc * kaiser;
    sum += side[j];
  }
  for (let j = 0; j < side.length; j++) side[j] *= 0.25 / sum;
  return side;
}

export const SIDE_TAPS = halfBandSideTaps();

/** The side taps rounded to float32, for the float32 stages (decimatorFloat32.ts). */
export const SIDE_TAPS_F32 = Float32Array.from(SIDE_TAPS);
