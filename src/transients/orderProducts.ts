/**
 * The demodulation products x e^(-j 2 pi k theta) of a run of samples for every tracked order,
 * appended to the orders' queues: the products demodulateOrder forms inside its loop
 * (orderDemodulation.ts), kept by the capture so that overlapping windows share them.
 *
 * A run is worked through order by order in the WebAssembly kernel (captureKernel.ts), or where it
 * cannot load in the same loops in JavaScript, which give the same numbers. The reference's
 * cosine and sine come from the angle in turns, reduced exactly (turnSinCos.ts: within about an
 * ulp of the exact values, where Math.cos(2 pi f) carries the rounding of 2 pi f). The 1X
 * phasor of each sample is computed once; an order that is a whole multiple k takes its k-th
 * power by repeated multiplication (rounding grows about k x 1e-16), any other order its own
 * cosine and sine. A sample without an angle (NaN) gives NaN products.
 */
import type { FloatQueue } from './floatQueue.ts';
import { CAPTURE_KERNEL_RUN, captureKernel } from './captureKernel.ts';
import { turnsSinCos } from './turnSinCos.ts';

/** Whole multiples up to this are powers of the 1X phasor. */
export const MAX_POWER_MULTIPLE = 64;

/** Samples in one run at most (the size of the kernel's arrays and the scratch below). */
export const PRODUCT_RUN = CAPTURE_KERNEL_RUN;

/** Per sample of a run, the 1X phasor and one other order's: scratch shared by every capture (filled and read within one call). */
const cos1 = new Float64Array(PRODUCT_RUN);
const sin1 = new Float64Array(PRODUCT_RUN);
const cosK = new Float64Array(PRODUCT_RUN);
const sinK = new Float64Array(PRODUCT_RUN);

/** Per order, its multiple where that is a whole power of the 1X phasor, else 0. */
export function phasorPowers(multiples: readonly number[]): Int32Array {
  return Int32Array.from(multiples, (k) => (Number.isInteger(k) && k >= 1 && k <= MAX_POWER_MULTIPLE ? k : 0));
}

/**
 * Appends the products of samples x[xAt + j] at angles revs[j] (revolutions), j < count <=
 * PRODUCT_RUN, to re[i] and im[i] for each order i of `multiples` (`powers` from phasorPowers).
 */
export function appendOrderProducts(
  x: Float64Array,
  xAt: number,
  revs: Float64Array,
  count: number,
  multiples: readonly number[],
  powers: Int32Array,
  re: readonly FloatQueue[],
  im: readonly FloatQueue[],
): void {
  const kernel = captureKernel();
  if (kernel === null) {
    appendInJavaScript(x, xAt, revs, count, multiples, powers, re, im);
    return;
  }
  kernel.x.set(x.subarray(xAt, xAt + count));
  if (revs !== kernel.revs) kernel.revs.set(revs.subarray(0, count));
  let anyPower = false;
  for (let i = 0; i < powers.length; i++) if (powers[i] > 0) anyPower = true;
  if (anyPower) kernel.turns(count, 1, 'a');
  for (let i = 0; i < powers.length; i++) {
    const power = powers[i];
    if (power > 0) kernel.products(count, 'a', power);
    else {
      kernel.turns(count, multiples[i], 'b');
      kernel.products(count, 'b', 1);
    }
    // extend first: it may replace the queue's array.
    const atRe = re[i].extend(count);
    re[i].array.set(kernel.re.subarray(0, count), atRe);
    const atIm = im[i].extend(count);
    im[i].array.set(kernel.im.subarray(0, count), atIm);
  }
}

/** appendOrderProducts where the kernel cannot load: the same operations, in JavaScript. */
function appendInJavaScript(
  x: Float64Array,
  xAt: number,
  revs: Float64Array,
  count: number,
  multiples: readonly number[],
  powers: Int32Array,
  re: readonly FloatQueue[],
  im: readonly FloatQueue[],
): void {
  let anyPower = false;
  for (let i = 0; i < powers.length; i++) if (powers[i] > 0) anyPower = true;
  if (anyPower) turnsSinCos(revs, count, 1, cos1, sin1);
  for (let i = 0; i < powers.length; i++) {
    const atRe = re[i].extend(count);
    const atIm = im[i].extend(count);
    const pr = re[i].array;
    const pi = im[i].array;
    const power = powers[i];
    if (power === 0) turnsSinCos(revs, count, multiples[i], cosK, sinK);
    const c1s = power === 0 ? cosK : cos1;
    const s1s = power === 0 ? sinK : sin1;
    for (let j = 0; j < count; j++) {
      const c1 = c1s[j];
      const s1 = s1s[j];
      let c = c1;
      let sn = s1;
      for (let p = 1; p < power; p++) {
        const cn = c * c1 - sn * s1;
        sn = sn * c1 + c * s1;
        c = cn;
      }
      const v = x[xAt + j];
      pr[atRe + j] = v * c;
      pi[atIm + j] = -v * sn;
    }
  }
}

/**
 * Each listed order's complex amplitude over one window: 2 x the weighted mean of its products
 * at queue indices [from, from + w.length) (from the queues' fronts), into outRe[i] and
 * outIm[i] for i in orders[0..count). Two orders share a pass, four sums in flight instead of
 * two; each sum still adds its terms in window order, as one pass per order would.
 */
export function windowedAmplitudes(
  w: Float64Array,
  wSum: number,
  from: number,
  orders: Int32Array,
  count: number,
  re: readonly FloatQueue[],
  im: readonly FloatQueue[],
  outRe: Float64Array,
  outIm: Float64Array,
): void {
  const length = w.length;
  let o = 0;
  for (; o + 1 < count; o += 2) {
    const a = orders[o];
    const b = orders[o + 1];
    const prA = re[a].array;
    const piA = im[a].array;
    const prB = re[b].array;
    const piB = im[b].array;
    const kRA = re[a].offset + from;
    const kIA = im[a].offset + from;
    const kRB = re[b].offset + from;
    const kIB = im[b].offset + from;
    let reA = 0;
    let imA = 0;
    let reB = 0;
    let imB = 0;
    if (kIA === kRA && kRB === kRA && kIB === kRA) {
      // The usual case (the queues have one history): one index for all four.
      for (let n = 0, k = kRA, end = kRA + length; k < end; n++, k++) {
        const wn = w[n];
        reA += wn * prA[k];
        imA += wn * piA[k];
        reB += wn * prB[k];
        imB += wn * piB[k];
      }
    } else {
      for (let n = 0; n < length; n++) {
        const wn = w[n];
        reA += wn * prA[kRA + n];
        imA += wn * piA[kIA + n];
        reB += wn * prB[kRB + n];
        imB += wn * piB[kIB + n];
      }
    }
    outRe[a] = (2 * reA) / wSum;
    outIm[a] = (2 * imA) / wSum;
    outRe[b] = (2 * reB) / wSum;
    outIm[b] = (2 * imB) / wSum;
  }
  if (o < count) {
    const a = orders[o];
    const pr = re[a].array;
    const pi = im[a].array;
    const kR = re[a].offset + from;
    const kI = im[a].offset + from;
    let sRe = 0;
    let sIm = 0;
    for (let n = 0; n < length; n++) {
      sRe += w[n] * pr[kR + n];
      sIm += w[n] * pi[kI + n];
    }
    outRe[a] = (2 * sRe) / wSum;
    outIm[a] = (2 * sIm) / wSum;
  }
}
