/**
 * The arrays of one rolling spectrum and the per-frame steps on them: in the WebAssembly
 * kernel's memory, where the kernel runs (spectrumKernel.ts), else plain typed arrays with the
 * JavaScript kernels (frameKernels.ts). Both give the same numbers.
 *
 * Per channel: the frame (float32), the running sum and the ring of power spectra (float64).
 * Shared per frame size (one frame is computed at a time): the window, the windowed frame, the
 * FFT's ordered output, the newest power spectrum (written and read within one frame's step)
 * and the amplitude before it is copied out.
 *
 * Views on kernel memory go stale when the memory grows: `refresh()` at the start of every
 * push and reset (allocation only happens in constructors, never inside a push).
 */
import { frameMean, removeMeanAndWindow, updateAverage } from './frameKernels.ts';
import type { RealFft } from './realFft.ts';
import { spectrumKernel, type SpectrumKernel } from './spectrumKernel.ts';

interface Pointers {
  frame: number;
  power: number;
  sum: number;
  ring: number[];
  window: number;
  windowed: number;
  ordered: number;
  amp: number;
}

export class SpectrumArrays {
  frame: Float32Array;
  power: Float64Array;
  sum: Float64Array;
  ring: Float64Array[];
  private windowed: Float32Array;
  private ordered: Float32Array;
  private amp: Float64Array;
  private readonly window: Float32Array;
  private readonly kernel: SpectrumKernel | null;
  private readonly ptr: Pointers | null = null;
  private viewsOf: ArrayBufferLike | null = null;
  private own: { ptr: number; bytes: number }[] = [];
  private readonly n: number;
  private readonly lines: number;
  private readonly fft: RealFft;
  private readonly ordered_: boolean;

  /** `kernel`: the process's by default; null runs the JavaScript kernels (tests pass null to check them). */
  constructor(frameSize: number, averages: number, window: Float32Array, fft: RealFft, kernel: SpectrumKernel | null = spectrumKernel()) {
    const n = frameSize;
    const lines = n / 2 + 1;
    this.n = n;
    this.lines = lines;
    this.fft = fft;
    this.window = window;
    this.kernel = kernel;
    this.ordered_ = kernel !== null && fft.orderedTransform !== undefined;
    if (kernel === null) {
      this.frame = new Float32Array(n);
      this.windowed = new Float32Array(n);
      this.power = new Float64Array(lines);
      this.sum = new Float64Array(lines);
      this.ring = Array.from({ length: averages }, () => new Float64Array(lines));
      this.ordered = new Float32Array(0);
      this.amp = new Float64Array(0);
      return;
    }
    const f64Bytes = 8 * lines;
    const own = (this.own = [
      { ptr: kernel.alloc(4 * n), bytes: 4 * n },
      { ptr: kernel.alloc(f64Bytes), bytes: f64Bytes },
      ...Array.from({ length: averages }, () => ({ ptr: kernel.alloc(f64Bytes), bytes: f64Bytes })),
    ]);
    kernel.releaseWith(this, own);
    const windowKey = `window:${n}`;
    const fresh = !kernel.hasShared(windowKey);
    this.ptr = {
      frame: own[0].ptr,
      power: kernel.sharedBlock(`power:${n}`, f64Bytes),
      sum: own[1].ptr,
      ring: own.slice(2).map((b) => b.ptr),
      window: kernel.sharedBlock(windowKey, 4 * n),
      windowed: kernel.sharedBlock(`windowed:${n}`, 4 * n),
      ordered: kernel.sharedBlock(`ordered:${n}`, 4 * n),
      amp: kernel.sharedBlock(`amp:${n}`, f64Bytes),
    };
    if (fresh) kernel.f32(this.ptr.window, n).set(window);
    // Fresh blocks may be reused ones: the frame and ring start as zeros, like new arrays.
    kernel.f32(this.ptr.frame, n).fill(0);
    for (const r of this.ptr.ring) kernel.f64(r, lines).fill(0);
    kernel.f64(this.ptr.sum, lines).fill(0);
    // Placeholders until refresh() makes the views.
    this.frame = this.windowed = this.ordered = new Float32Array(0);
    this.power = this.sum = this.amp = new Float64Array(0);
    this.ring = [];
    this.refresh();
  }

  /** Gives the kernel memory back now; the arrays must not be used after. */
  dispose(): void {
    this.kernel?.releaseNow(this, this.own);
    this.own = [];
  }

  /** Makes the views again if the kernel's memory has grown since they were made. */
  refresh(): void {
    const k = this.kernel;
    const p = this.ptr;
    if (k === null || p === null || this.viewsOf === k.memory.buffer) return;
    this.viewsOf = k.memory.buffer;
    this.frame = k.f32(p.frame, this.n);
    this.windowed = k.f32(p.windowed, this.n);
    this.ordered = k.f32(p.ordered, this.n);
    this.power = k.f64(p.power, this.lines);
    this.sum = k.f64(p.sum, this.lines);
    this.amp = k.f64(p.amp, this.lines);
    this.ring = p.ring.map((r) => k.f64(r, this.lines));
  }

  /**
   * Removes the frame's mean, applies the window and transforms it. Returns the mean (not
   * finite when the frame holds NaN or Infinity).
   */
  transformFrame(): number {
    const k = this.kernel;
    const p = this.ptr;
    let mean: number;
    if (k !== null && p !== null) {
      mean = k.fn.meanWindow(p.frame, p.window, p.windowed, this.n);
    } else {
      mean = frameMean(this.frame);
      removeMeanAndWindow(this.frame, mean, this.window, this.windowed);
    }
    if (this.ordered_) (this.fft.orderedTransform as (i: Float32Array, o: Float32Array) => void)(this.windowed, this.ordered);
    else this.fft.powerSpectrum(this.windowed, this.power);
    return mean;
  }

  /**
   * The incremental step: the new frame's power replaces ring slot `slot` in the running sum and
   * `out` gets the amplitudes (updateAverage in frameKernels.ts says how).
   */
  averageInto(slot: number, scale: number, inv: number, out: Float64Array): void {
    const k = this.kernel;
    const p = this.ptr;
    if (this.ordered_ && k !== null && p !== null) {
      k.fn.powerAverage(p.ordered, p.sum, p.ring[slot], p.amp, scale * inv, this.n / 2);
      out.set(this.amp);
    } else {
      updateAverage(this.sum, this.ring[slot], this.power, scale, inv, out);
    }
  }

  /** The new frame's power into `power`, for the rebuild path (the incremental one fuses it). */
  settlePower(): void {
    const k = this.kernel;
    const p = this.ptr;
    if (this.ordered_ && k !== null && p !== null) k.fn.power(p.ordered, p.power, this.n / 2);
  }
}
