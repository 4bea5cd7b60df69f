/**
 * Transient capture's order products in WebAssembly SIMD (captureKernel.wat): one module instance
 * and its own fixed memory per process (per worker thread), made on first use, synchronously
 * (the module is under 2 KiB). The memory never grows, so the views below stay valid.
 *
 * Where WebAssembly SIMD is missing, `captureKernel()` returns null and orderProducts.ts computes
 * the same numbers in JavaScript (turnSinCos.ts; test/captureKernel.test.ts holds them equal).
 */
import { CAPTURE_KERNEL_WASM_BASE64 } from './captureKernelWasm.ts';

/** Samples per call at most: each array below holds this many float64. */
export const CAPTURE_KERNEL_RUN = 512;

const X = 0;
const REVS = 4096;
const COS_A = 8192;
const SIN_A = 12288;
const COS_B = 16384;
const SIN_B = 20480;
const PRODUCTS = 24576;
const DEC_STATE = 32768;
const DEC_SAMPLES = 65536;
const DEC_TIMES = 98304;
const DEC_VALUES = 163840;
const SUMS = 229376;
const WEIGHTS = 229440;
const ORDER_PRODUCTS = 237632;
const ZEROS = 303168;

/** Window samples the sums take per call at most. */
export const WINDOW_CHUNK = 1024;

/** Decimator input samples per call at most. */
export const DECIMATE_CHUNK = 8192;

export interface CaptureKernel {
  /** Cosine and sine of 2 pi frac(k revs[j]), j < count, into the first (a) or second (b) pair. */
  turns(count: number, k: number, pair: 'a' | 'b'): void;
  /** runProducts[2j], runProducts[2j + 1] = x (cos - j sin) of a pair raised to `power` (>= 1), j < count. */
  products(count: number, pair: 'a' | 'b', power: number): void;
  readonly x: Float64Array;
  readonly revs: Float64Array;
  readonly runProducts: Float64Array;
  /**
   * Adds to `sums` (re, im of four orders) the weights' first n <= WINDOW_CHUNK values times
   * each of `orderProducts` (interleaved pairs); `orders` of them are used, the rest count as zero.
   */
  windowSums(n: number, orders: number): void;
  readonly sums: Float64Array;
  readonly weights: Float64Array;
  readonly orderProducts: readonly Float64Array[];
  /**
   * The triangle decimator over `length` <= DECIMATE_CHUNK samples in `decSamples`, sample 0
   * being sample `first` of the block that starts at t0S; its state in `decState` (sum, ramp,
   * previous ramp, block start) and `decCounts` (fill, whether there is a previous block).
   * Returns how many outputs it wrote to `decTimes` and `decValues`.
   */
  decimate(length: number, first: number, t0S: number, dtS: number, m: number, norm: number): number;
  readonly decSamples: Float32Array;
  readonly decState: Float64Array;
  readonly decCounts: Int32Array;
  readonly decTimes: Float64Array;
  readonly decValues: Float64Array;
}

type TurnsFn = (revs: number, count: number, k: number, outC: number, outS: number) => void;
type ProductsFn = (x: number, count: number, cos: number, sin: number, power: number, out: number) => void;
type WindowSumsFn = (w: number, n: number, p0: number, p1: number, p2: number, p3: number, acc: number) => void;
type DecimateFn = (src: number, length: number, first: number, st: number, t0S: number, dtS: number, m: number, norm: number, times: number, values: number) => number;

let kernel: CaptureKernel | null | undefined;

/** The process's kernel, or null where this WebAssembly has no SIMD. */
export function captureKernel(): CaptureKernel | null {
  if (kernel === undefined) {
    const bytes = Uint8Array.from(atob(CAPTURE_KERNEL_WASM_BASE64), (c) => c.charCodeAt(0));
    if (!WebAssembly.validate(bytes)) kernel = null;
    else {
      const exports = new WebAssembly.Instance(new WebAssembly.Module(bytes), {}).exports;
      const turns = exports.turns as TurnsFn;
      const products = exports.products as ProductsFn;
      const decimate = exports.decimate as DecimateFn;
      const windowSums = exports.windowSums as WindowSumsFn;
      const at = (i: number, orders: number): number => (i < orders ? ORDER_PRODUCTS + 16 * WINDOW_CHUNK * i : ZEROS);
      const buffer = (exports.memory as WebAssembly.Memory).buffer;
      const view = (at: number): Float64Array => new Float64Array(buffer, at, CAPTURE_KERNEL_RUN);
      kernel = {
        turns: (count, k, pair) => (pair === 'a' ? turns(REVS, count, k, COS_A, SIN_A) : turns(REVS, count, k, COS_B, SIN_B)),
        products: (count, pair, power) =>
          pair === 'a' ? products(X, count, COS_A, SIN_A, power, PRODUCTS) : products(X, count, COS_B, SIN_B, power, PRODUCTS),
        x: view(X),
        revs: view(REVS),
        runProducts: new Float64Array(buffer, PRODUCTS, 2 * CAPTURE_KERNEL_RUN),
        windowSums: (n, orders) => windowSums(WEIGHTS, n, at(0, orders), at(1, orders), at(2, orders), at(3, orders), SUMS),
        sums: new Float64Array(buffer, SUMS, 8),
        weights: new Float64Array(buffer, WEIGHTS, WINDOW_CHUNK),
        orderProducts: [0, 1, 2, 3].map((i) => new Float64Array(buffer, at(i, 4), 2 * WINDOW_CHUNK)),
        decimate: (length, first, t0S, dtS, m, norm) => decimate(DEC_SAMPLES, length, first, DEC_STATE, t0S, dtS, m, norm, DEC_TIMES, DEC_VALUES),
        decSamples: new Float32Array(buffer, DEC_SAMPLES, DECIMATE_CHUNK),
        decState: new Float64Array(buffer, DEC_STATE, 4),
        decCounts: new Int32Array(buffer, DEC_STATE + 32, 2),
        decTimes: new Float64Array(buffer, DEC_TIMES, DECIMATE_CHUNK),
        decValues: new Float64Array(buffer, DEC_VALUES, DECIMATE_CHUNK),
      };
    }
  }
  return kernel;
}
