/**
 * Cosine and sine of whole-turn angles, 2 pi frac(k rev), for runs of samples: the capture's
 * order reference (orderProducts.ts). This is the JavaScript twin of the `turns` loop of the
 * WebAssembly kernel (captureKernel.wat) and gives the same numbers bit for bit (the same float64
 * operations in the same order; neither has a fused multiply-add); it runs where that kernel
 * cannot load.
 *
 * Why not Math.cos(2 * Math.PI * f): the angle in turns reduces exactly, which 2 pi f in radians
 * does not. The fraction f is taken to the nearest quarter turn q / 4 with no rounding (f and
 * q / 4 are within a factor of two), and r = f - q / 4 in [-1/8, 1/8] goes into the Taylor
 * series of sin(2 pi r) / r and cos(2 pi r) in r^2, nine terms each (the first term left out is
 * below 1e-18 of the result), the leading 2 pi added as a high and a low part. Against an exact
 * evaluation the results are within about one unit in the last place (test/captureKernel.test.ts
 * states the measured figure). A NaN angle gives NaN.
 */

/** (-1)^n (2 pi)^(2n+1) / (2n+1)!, n = 8 down to 1, as doubles; then 2 pi's low and high parts. */
const S8 = 0.10422916220813984;
const S7 = -0.7181223017785006;
const S6 = 3.819952584848282;
const S5 = -15.09464257682299;
const S4 = 42.058693944897655;
const S3 = -76.70585975306139;
const S2 = 81.60524927607506;
const S1 = -41.34170224039976;
const TWO_PI_LO = 2.4492935982947064e-16;
const TWO_PI_HI = 6.283185307179586;
/** (-1)^n (2 pi)^(2n) / (2n)!, n = 8 down to 1 (n = 0 is 1). */
const C8 = 0.28200596845579123;
const C7 = -1.714390711088672;
const C6 = 7.903536371318469;
const C5 = -26.4262567833744;
const C4 = 60.24464137187666;
const C3 = -85.45681720669373;
const C2 = 64.9393940226683;
const C1 = -19.739208802178716;

/** outCos[j], outSin[j] = cos, sin of 2 pi frac(k revs[j]) for j < count. */
export function turnsSinCos(revs: Float64Array, count: number, k: number, outCos: Float64Array, outSin: Float64Array): void {
  for (let j = 0; j < count; j++) {
    const t = k * revs[j];
    const f = t - Math.floor(t);
    const q = Math.floor(f * 4 + 0.5);
    const r = f - q * 0.25;
    const r2 = r * r;
    let ps = S8;
    let pc = C8;
    ps = ps * r2 + S7;
    pc = pc * r2 + C7;
    ps = ps * r2 + S6;
    pc = pc * r2 + C6;
    ps = ps * r2 + S5;
    pc = pc * r2 + C5;
    ps = ps * r2 + S4;
    pc = pc * r2 + C4;
    ps = ps * r2 + S3;
    pc = pc * r2 + C3;
    ps = ps * r2 + S2;
    pc = pc * r2 + C2;
    ps = ps * r2 + S1;
    pc = pc * r2 + C1;
    ps = ps * r2 + TWO_PI_LO + TWO_PI_HI;
    pc = pc * r2 + 0 + 1;
    const s = r * ps;
    // Back to the whole angle: q quarter turns ahead of r (q = 4 is a whole turn).
    const qi = q & 3;
    const a = qi & 1 ? s : pc;
    const b = qi & 1 ? pc : s;
    outCos[j] = (qi + 1) & 2 ? -a : a;
    outSin[j] = qi & 2 ? -b : b;
  }
}
