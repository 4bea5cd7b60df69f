/**
 * The demodulation products x e^(-j 2 pi k theta) of a run of samples for every tracked order,
 * appended to the orders' queues (re and im interleaved, two values a sample): the products
 * demodulateOrder forms inside its loop (orderDemodulation.ts), kept by the capture so that
 * overlapping windows share them; and each window's weighted sums of them.
 *
 * Both run in the WebAssembly kernel (captureKernel.ts), or where it cannot load in the same
 * loops in JavaScript, which give the same numbers. The reference's cosine and sine come from
 * the angle in turns, reduced exactly (turnSinCos.ts: within about an ulp of the exact values,
 * where Math.cos(2 pi f) carries the rounding of 2 pi f). The 1X phasor of each sample is
 * computed once; an order that is a whole multiple k takes its k-th power by repeated
 * multiplication (rounding grows about k x 1e-16), any other order its own cosine and sine. A
 * sample without an angle (NaN) gives NaN products.
 */
import type { FloatQueue } from './floatQueue.ts';
import { CAPTURE_KERNEL_RUN, captureKernel, WINDOW_CHUNK } from './captureKernel.ts';
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
 * PRODUCT_RUN, to products[i] (re, im) for each order i of `multiples` (`powers` from phasorPowers).
 */
export function appendOrderProducts(
  x: Float64Array,
  xAt: number,
  revs: Float64Array,
  count: number,
  multiples: readonly number[],
  powers: Int32Array,
  products: readonly FloatQueue[],
): void {
  const kernel = captureKernel();
  let anyPower = false;
  for (let i = 0; i < powers.length; i++) if (powers[i] > 0) anyPower = true;
  if (kernel === null) {
    if (anyPower) turnsSinCos(revs, count, 1, cos1, sin1);
    for (let i = 0; i < powers.length; i++) {
      if (powers[i] === 0) turnsSinCos(revs, count, multiples[i], cosK, sinK);
      const at = products[i].extend(2 * count);
      powersTimes(x, xAt, count, powers[i] === 0 ? cosK : cos1, powers[i] === 0 ? sinK : sin1, Math.max(1, powers[i]), products[i].array, at);
    }
    return;
  }
  kernel.x.set(x.subarray(xAt, xAt + count));
  if (revs !== kernel.revs) kernel.revs.set(revs.subarray(0, count));
  if (anyPower) kernel.turns(count, 1, 'a');
  for (let i = 0; i < powers.length; i++) {
    if (powers[i] > 0) kernel.products(count, 'a', powers[i]);
    else {
      kernel.turns(count, multiples[i], 'b');
      kernel.products(count, 'b', 1);
    }
    // extend first: it may replace the queue's array.
    const at = products[i].extend(2 * count);
    products[i].array.set(kernel.runProducts.subarray(0, 2 * count), at);
  }
}

/** The kernel's `products` in JavaScript: x times the phasor (c1, s1) raised to `power`, conjugated, interleaved into out from `at`. */
function powersTimes(x: Float64Array, xAt: number, count: number, c1s: Float64Array, s1s: Float64Array, power: number, out: Float64Array, at: number): void {
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
    out[at + 2 * j] = v * c;
    out[at + 2 * j + 1] = -v * sn;
  }
}

/**
 * Each listed order's complex amplitude over one window: 2 x the weighted mean of its products
 * at queue sample indices [from, from + w.length) (from the queues' fronts), into outRe[i] and
 * outIm[i] for i in orders[0..count). Four orders share a pass, each sum still adding its terms
 * in window order, as one pass per sum would (and so the same numbers in the kernel and in
 * JavaScript).
 */
export function windowedAmplitudes(
  w: Float64Array,
  wSum: number,
  from: number,
  orders: Int32Array,
  count: number,
  products: readonly FloatQueue[],
  outRe: Float64Array,
  outIm: Float64Array,
): void {
  const kernel = captureKernel();
  const length = w.length;
  for (let o = 0; o < count; o += 4) {
    const group = Math.min(4, count - o);
    if (kernel === null) {
      for (let g = 0; g < group; g++) {
        const q = products[orders[o + g]];
        const p = q.array;
        const at = q.offset + 2 * from;
        let re = 0;
        let im = 0;
        for (let n = 0; n < length; n++) {
          re += w[n] * p[at + 2 * n];
          im += w[n] * p[at + 2 * n + 1];
        }
        outRe[orders[o + g]] = (2 * re) / wSum;
        outIm[orders[o + g]] = (2 * im) / wSum;
      }
      continue;
    }
    const sums = kernel.sums;
    sums.fill(0);
    for (let done = 0; done < length; done += WINDOW_CHUNK) {
      const n = Math.min(WINDOW_CHUNK, length - done);
      kernel.weights.set(n === length ? w : w.subarray(done, done + n));
      for (let g = 0; g < group; g++) {
        const q = products[orders[o + g]];
        const at = q.offset + 2 * (from + done);
        kernel.orderProducts[g].set(q.array.subarray(at, at + 2 * n));
      }
      kernel.windowSums(n, group);
    }
    for (let g = 0; g < group; g++) {
      outRe[orders[o + g]] = (2 * sums[2 * g]) / wSum;
      outIm[orders[o + g]] = (2 * sums[2 * g + 1]) / wSum;
    }
  }
}
