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
 * Non-zero side taps h[d] of a half-band filter of 4 count - 1 taps, for odd offsets d = 1, 3,
 * ..., 2 count - 1 from the centre: h[d] = 0.5 sinc(d / 2) kaiser(d), then scaled so that
 * 0.5 + 2 sum(h) = 1 (unit gain at DC), which keeps the half-band identity H(f) + H(fs/2 - f) = 1.
 */
export function halfBandSideTaps(count: number): Float64Array {
  const half = 2 * count - 1;
  const side = new Float64Array(count);
  let sum = 0;
  for (let j = 0; j < side.length; j++) {
    const d = 2 * j + 1;
    const sinc = Math.sin((Math.PI * d) / 2) / ((Math.PI * d) / 2);
    const kaiser = besselI0(KAISER_BETA * Math.sqrt(1 - (d / half) ** 2)) / besselI0(KAISER_BETA);
    side[j] = 0.5 * sinc * kaiser;
    sum += side[j];
  }
  for (let j = 0; j < side.length; j++) side[j] *= 0.25 / sum;
  return side;
}

/** The 59-tap stage's 15 side taps (offsets 1, 3, ..., 29). */
export const SIDE_TAPS = halfBandSideTaps((HALF + 1) / 2);

/**
 * Side taps of the float32 cascade's stage whose output is still `remaining` times the
 * cascade's output rate (2 for the last stage). Only what folds onto the kept band, 0 to 0.4
 * of the cascade's output rate fo, must be rejected, and a stage with `remaining` = D runs at
 * D fo: it must pass 0 to 0.4 fo and stop from D fo / 2 - 0.4 fo, a transition band that widens
 * with D. So the last stage keeps the 59 taps (transition 0.2 to 0.3 of its rate), the two
 * before it take 23 (0.1 to 0.4 and 0.05 to 0.45) and any earlier 19 (from 0.025 to 0.475):
 * the cascade's alias rejection stays at about 90 dB and its ripple under 0.001 dB (both
 * measured in test/decimator.test.ts), for about half the arithmetic of 59 taps at every stage.
 */
export function stageSideTaps(remaining: number): Float64Array {
  return remaining <= 2 ? SIDE_TAPS : remaining <= 8 ? halfBandSideTaps(6) : halfBandSideTaps(5);
}
