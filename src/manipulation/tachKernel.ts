/**
 * The tach edge detector's per-sample loop in WebAssembly (tachKernel.wat): one module instance
 * and its own fixed memory per process (per worker thread), made on first use, synchronously
 * (the module is under 1 KiB). The memory never grows, so the views below stay valid.
 *
 * Why not JavaScript: the loop is a chain of float64 operations per sample whose speed in V8
 * depended on the history of its compilation (a deoptimisation on the first edge left it about
 * three times slower in some processes and not in others); the kernel computes the same numbers
 * (test/tachKernel.test.ts checks them against the loop in JavaScript) at the same speed every time.
 */
import { TACH_KERNEL_WASM_BASE64 } from './tachKernelWasm.ts';

/** Byte offsets in the kernel's memory: the detector's state, then the samples. */
const STATE = 0;
const SAMPLES = 64;
/** Samples the kernel takes per call at most (64 KiB of float32; the memory is 128 KiB). */
export const TACH_KERNEL_CHUNK = 16384;

/** Detector states as the kernel numbers them (speedFromTach.ts uses the same). */
export const TACH_UNKNOWN = 0;
export const TACH_LOW = 1;
export const TACH_HIGH = 2;

export interface TachKernel {
  /**
   * Runs samples from..n-1 of `samples` (n <= TACH_KERNEL_CHUNK, already copied in); `first` is
   * the stream index of samples[0]. Returns the index of the sample that completes an edge (its
   * crossing time in state[3]), or n.
   */
  edges(from: number, n: number, first: number, relax: number, warmup: number, originS: number, dtS: number): number;
  /** hi, lo, prevX, crossingS. */
  readonly state: Float64Array;
  /** TACH_UNKNOWN, TACH_LOW or TACH_HIGH. */
  readonly hysteresis: Int32Array;
  readonly samples: Float32Array;
}

type EdgesFn = (src: number, from: number, n: number, st: number, first: number, relax: number, warmup: number, originS: number, dtS: number) => number;

let kernel: TachKernel | undefined;

export function tachKernel(): TachKernel {
  if (kernel === undefined) {
    const bytes = Uint8Array.from(atob(TACH_KERNEL_WASM_BASE64), (c) => c.charCodeAt(0));
    const exports = new WebAssembly.Instance(new WebAssembly.Module(bytes), {}).exports;
    const fn = exports.tachEdges as EdgesFn;
    const buffer = (exports.memory as WebAssembly.Memory).buffer;
    kernel = {
      edges: (from, n, first, relax, warmup, originS, dtS) => fn(SAMPLES, from, n, STATE, first, relax, warmup, originS, dtS),
      state: new Float64Array(buffer, STATE, 4),
      hysteresis: new Int32Array(buffer, STATE + 32, 1),
      samples: new Float32Array(buffer, SAMPLES, TACH_KERNEL_CHUNK),
    };
  }
  return kernel;
}
