/**
 * Transient capture's order products in WebAssembly SIMD (orderKernel.wat): one module instance
 * and its own fixed memory per process (per worker thread), made on first use, synchronously
 * (the module is under 2 KiB). The memory never grows, so the views below stay valid.
 *
 * Where WebAssembly SIMD is missing, `orderKernel()` returns null and orderProducts.ts computes
 * the same numbers in JavaScript (turnSinCos.ts; test/orderKernel.test.ts holds them equal).
 */
import { ORDER_KERNEL_WASM_BASE64 } from './orderKernelWasm.ts';

/** Samples per call at most: each array below holds this many float64. */
export const ORDER_KERNEL_RUN = 512;

const X = 0;
const REVS = 4096;
const COS_A = 8192;
const SIN_A = 12288;
const COS_B = 16384;
const SIN_B = 20480;
const RE = 24576;
const IM = 28672;

export interface OrderKernel {
  /** Cosine and sine of 2 pi frac(k revs[j]), j < count, into the first (a) or second (b) pair. */
  turns(count: number, k: number, pair: 'a' | 'b'): void;
  /** re, im = x (cos - j sin) of a pair raised to `power` (>= 1), j < count. */
  products(count: number, pair: 'a' | 'b', power: number): void;
  readonly x: Float64Array;
  readonly revs: Float64Array;
  readonly re: Float64Array;
  readonly im: Float64Array;
}

type TurnsFn = (revs: number, count: number, k: number, outC: number, outS: number) => void;
type ProductsFn = (x: number, count: number, cos: number, sin: number, power: number, outRe: number, outIm: number) => void;

let kernel: OrderKernel | null | undefined;

/** The process's kernel, or null where this WebAssembly has no SIMD. */
export function orderKernel(): OrderKernel | null {
  if (kernel === undefined) {
    const bytes = Uint8Array.from(atob(ORDER_KERNEL_WASM_BASE64), (c) => c.charCodeAt(0));
    if (!WebAssembly.validate(bytes)) kernel = null;
    else {
      const exports = new WebAssembly.Instance(new WebAssembly.Module(bytes), {}).exports;
      const turns = exports.turns as TurnsFn;
      const products = exports.products as ProductsFn;
      const buffer = (exports.memory as WebAssembly.Memory).buffer;
      const view = (at: number): Float64Array => new Float64Array(buffer, at, ORDER_KERNEL_RUN);
      kernel = {
        turns: (count, k, pair) => (pair === 'a' ? turns(REVS, count, k, COS_A, SIN_A) : turns(REVS, count, k, COS_B, SIN_B)),
        products: (count, pair, power) =>
          pair === 'a' ? products(X, count, COS_A, SIN_A, power, RE, IM) : products(X, count, COS_B, SIN_B, power, RE, IM),
        x: view(X),
        revs: view(REVS),
        re: view(RE),
        im: view(IM),
      };
    }
  }
  return kernel;
}
