/**
 * The WebAssembly SIMD kernel of the rolling spectrum, the tachless tracker's CIC stage, warped
 * frames and its estimator's running median (spectrumKernel.wat), the half-band decimator's
 * stages (halfBandKernel.wat, a second module on the same memory) and the memory their arrays
 * live in.
 *
 * One module instance and one linear memory per process (per worker thread), made on first use,
 * synchronously (the module is under 5 KiB). Rolling spectra allocate their per-channel arrays
 * (frame, power, running sum, ring) in that memory, so the kernel reads and writes them in place
 * with no copy; scratch arrays that a frame uses only while it is being computed (the window, the
 * windowed frame, the FFT's output, the amplitude before it is handed out) are shared per frame
 * size, because JavaScript runs one frame at a time. Blocks of a rolling spectrum that is
 * disposed (a sensor forgetting its history: gaps, overload shedding) or garbage-collected go to
 * a free list by size and are reused, so rebuilding spectra does not grow the memory.
 *
 * Views on the memory are replaced whenever it grows (its buffer changes): callers take views
 * through `f32`/`f64` after any allocation.
 *
 * Where WebAssembly SIMD is missing, `spectrumKernel()` returns null and the rolling spectrum runs
 * its plain JavaScript kernels, which compute the same numbers.
 */
import { HALF_BAND_KERNEL_WASM_BASE64 } from './halfBandKernelWasm.ts';
import { SPECTRUM_KERNEL_WASM_BASE64 } from './spectrumKernelWasm.ts';

export interface KernelExports {
  /** Returns the frame's mean; writes float32((frame - mean) * w). Byte pointers, n a multiple of 4. */
  meanWindow(frame: number, w: number, out: number, n: number): number;
  /** power[k] = |X_k|^2 from the ordered real FFT layout; clobbers ordered[1]. */
  power(ordered: number, power: number, half: number): void;
  /** Incremental power average fused with the power; clobbers ordered[1]. See the .wat. */
  powerAverage(ordered: number, sum: number, leaving: number, out: number, c: number, half: number): void;
  /** One half-band decimation stage (decimator.ts); returns the outputs written. See the .wat. */
  halfBand(buf: number, count: number, first: number, out: number, taps: number, scratch: number): number;
  /** The same stage in float32, four outputs a step (decimatorFloat32.ts); returns the outputs written. See the .wat. */
  halfBand32(buf: number, count: number, first: number, out: number, taps: number, p: number, q: number): number;
  /** The float32 stage with 6 and with 5 side taps (23 and 19 taps), for a cascade's earlier stages. */
  halfBand32s6(buf: number, count: number, first: number, out: number, taps: number, p: number, q: number): number;
  halfBand32s5(buf: number, count: number, first: number, out: number, taps: number, p: number, q: number): number;
  /**
   * The warped, mean-removed and windowed frame of warpedSpectrum.ts; returns the mean. `xs`: n
   * float64 of scratch (where each sample falls in src). See the .wat.
   */
  warp(src: number, srcLength: number, frame: number, w: number, n: number, centre: number, rateHz: number, beta: number, uStart: number, du: number, xs: number): number;
  /** The running median of runningMedian.ts over float64 lines (no NaN); `w` holds 2 half + 3 float64. See the .wat. */
  runningMedian(a: number, w: number, out: number, half: number, from: number, top: number, lastLine: number): void;
  /** The tachless tracker's CIC stage (cicDecimator.ts) over float32 history and block; returns the outputs written. See the .wat. */
  cic(src: number, first: number, count: number, out: number, taps: number, n: number, r: number): number;
}

const PAGE = 65536;

export class SpectrumKernel {
  readonly memory: WebAssembly.Memory;
  readonly fn: KernelExports;
  private top = 16;
  private readonly freeBySize = new Map<number, number[]>();
  private readonly shared = new Map<string, number>();
  private readonly registry = new FinalizationRegistry<{ ptr: number; bytes: number }[]>((blocks) => {
    for (const b of blocks) this.release(b.ptr, b.bytes);
  });

  /** `modules`: the spectrum kernel's and the half-band stages', instantiated on one memory. */
  constructor(modules: Uint8Array[]) {
    this.memory = new WebAssembly.Memory({ initial: 1 });
    const exports = modules.map((bytes) => new WebAssembly.Instance(new WebAssembly.Module(bytes), { env: { memory: this.memory } }).exports);
    this.fn = Object.assign({}, ...exports) as KernelExports;
  }

  /** A block of at least `bytes` bytes on a 16-byte boundary, contents unspecified. */
  alloc(bytes: number): number {
    const size = (bytes + 15) & ~15;
    const reuse = this.freeBySize.get(size)?.pop();
    if (reuse !== undefined) return reuse;
    const ptr = this.top;
    this.top += size;
    const need = Math.ceil(this.top / PAGE) - this.memory.buffer.byteLength / PAGE;
    if (need > 0) this.memory.grow(need);
    return ptr;
  }

  release(ptr: number, bytes: number): void {
    const size = (bytes + 15) & ~15;
    let list = this.freeBySize.get(size);
    if (list === undefined) this.freeBySize.set(size, (list = []));
    list.push(ptr);
  }

  /** Frees `blocks` when `owner` is garbage-collected, unless `releaseNow` freed them first. */
  releaseWith(owner: object, blocks: { ptr: number; bytes: number }[]): void {
    this.registry.register(owner, blocks, owner);
  }

  /** Frees `owner`'s blocks at once (it will not use them again). */
  releaseNow(owner: object, blocks: { ptr: number; bytes: number }[]): void {
    if (this.registry.unregister(owner)) for (const b of blocks) this.release(b.ptr, b.bytes);
  }

  hasShared(key: string): boolean {
    return this.shared.has(key);
  }

  /** A block shared by everyone who asks with the same key (scratch for one frame at a time). */
  sharedBlock(key: string, bytes: number): number {
    let ptr = this.shared.get(key);
    if (ptr === undefined) {
      ptr = this.alloc(bytes);
      this.shared.set(key, ptr);
    }
    return ptr;
  }

  f32(ptr: number, length: number): Float32Array {
    return new Float32Array(this.memory.buffer, ptr, length);
  }

  f64(ptr: number, length: number): Float64Array {
    return new Float64Array(this.memory.buffer, ptr, length);
  }
}

let kernel: SpectrumKernel | null | undefined;

/** The process's kernel, or null where this WebAssembly has no SIMD. */
export function spectrumKernel(): SpectrumKernel | null {
  if (kernel === undefined) {
    const modules = [SPECTRUM_KERNEL_WASM_BASE64, HALF_BAND_KERNEL_WASM_BASE64].map((b) => Uint8Array.from(atob(b), (c) => c.charCodeAt(0)));
    kernel = modules.every((bytes) => WebAssembly.validate(bytes)) ? new SpectrumKernel(modules) : null;
  }
  return kernel;
}
