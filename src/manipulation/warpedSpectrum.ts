/**
 * The spectrum of one frame resampled in warped time, so that a shaft whose speed changes
 * linearly across the frame shows its orders as steady lines.
 *
 * Model over the frame (tau = t - t_centre, |tau| <= T / 2): shaft frequency
 *     f(tau) = fc (1 + beta tau)          (beta = relative slope, 1/s)
 * so the shaft angle is 2 pi fc u with
 *     u(tau) = tau + beta tau^2 / 2,      du / dtau = f(tau) / fc.
 * Equal steps of u are equal steps of shaft angle: resampled at N equal steps of u, every order
 * k of the shaft is a steady sine of frequency k fc, and a Hann-windowed spectrum of the
 * resampled frame shows it as one sharp line whatever the ramp (computed order tracking, with
 * the reference phase taken from the model instead of a tach). The u span of the frame is
 * exactly T (u(T/2) - u(-T/2) = T), so lines are 1 / T apart and line k fc / binHz is the
 * speed at the frame's centre. With beta = 0 this is the plain spectrum of the frame.
 *
 * Inverse: tau(u) = (sqrt(1 + 2 beta u) - 1) / beta, real while |beta| T / 2 < 1 (the speed
 * stays positive across the frame); callers keep |beta| <= maxBeta(T).
 *
 * Samples between the input's are taken by 4-point cubic (Catmull-Rom) interpolation; the input
 * should be sampled at 4 times the highest frequency of interest or more, where its error is
 * under 1 % of amplitude.
 */
import { hannWindow } from './hannWindow.ts';
import { createFftJsRealFft, type RealFft } from './realFft.ts';
import { spectrumKernel, type SpectrumKernel } from './spectrumKernel.ts';

/** Largest |beta| (1/s) a frame of `spanS` takes: the model's speed stays above 10 % of fc. */
export function maxBeta(spanS: number): number {
  return 1.8 / spanS;
}

export class WarpedSpectrum {
  readonly size: number;
  readonly spanS: number;
  readonly binHz: number;
  /**
   * Amplitude per line (RMS of a sine on the line), lines 0..size/2; lines 0..lines - 1 are
   * rewritten by each compute(), those above stay 0.
   */
  readonly amplitude: Float64Array;
  /** Lines computed (all, size / 2 + 1, unless the caller reads fewer). */
  readonly lines: number;
  private readonly frame: Float32Array;
  private readonly power: Float64Array;
  private readonly window: Float32Array;
  private readonly scale: number;
  private readonly fft: RealFft;
  /** The WebAssembly frame (the same numbers as the loop below), for sources up to `maxSource` samples. */
  private readonly wasm: { kernel: SpectrumKernel; src: number; frame: number; xs: number; window: number; maxSource: number } | null;
  private views: { buffer: ArrayBufferLike; src: Float32Array; frame: Float32Array } | null = null;
  /** Length of the source last copied into the kernel's memory (-1: none). */
  private copiedLength = -1;

  /**
   * `maxSourceLength`: the longest `src` compute() will be given, for the WebAssembly kernel's
   * buffers (allocated here, never while computing); longer sources, or `useKernel` false, run
   * the JavaScript loop. `lines`: how many lines from DC up the caller reads. `backend`: a
   * transform of the backend to use (of any size; the frames' own is made from it), fft.js when
   * absent.
   */
  constructor(size: number, spanS: number, maxSourceLength = 0, useKernel = true, lines = size / 2 + 1, backend?: RealFft) {
    this.size = size;
    this.lines = Math.min(size / 2 + 1, Math.max(1, lines));
    this.spanS = spanS;
    this.binHz = 1 / spanS;
    this.fft = backend ? backend.withSize(size) : createFftJsRealFft(size);
    this.frame = new Float32Array(size);
    this.power = new Float64Array(size / 2 + 1);
    this.amplitude = new Float64Array(size / 2 + 1);
    const w = hannWindow(size);
    this.window = w.w;
    // A sine of peak A on a line gives |X| = A sum(w) / 2; RMS A / sqrt(2).
    this.scale = Math.SQRT2 / w.sum;
    const kernel = useKernel && maxSourceLength >= 4 && size % 4 === 0 ? spectrumKernel() : null;
    if (kernel) {
      const window = kernel.sharedBlock(`warpWindow:${size}`, 4 * size);
      kernel.f32(window, size).set(this.window);
      const blocks = [
        { ptr: kernel.alloc(4 * maxSourceLength), bytes: 4 * maxSourceLength },
        { ptr: kernel.alloc(4 * size), bytes: 4 * size },
        { ptr: kernel.alloc(8 * size), bytes: 8 * size },
      ];
      kernel.releaseWith(this, blocks);
      this.wasm = { kernel, src: blocks[0].ptr, frame: blocks[1].ptr, xs: blocks[2].ptr, window, maxSource: maxSourceLength };
    } else this.wasm = null;
  }

  /**
   * `src` is sampled at `rateHz`; `centre` is the (fractional) index in src of tau = 0. The frame
   * reaches T / 2 either side of it; src must hold 2 samples beyond each end. `sameSource`: src
   * holds the same samples as at the last call (another slope of the same frame), so the kernel's
   * copy of it stands.
   */
  compute(src: Float32Array, centre: number, rateHz: number, beta: number, sameSource = false): Float64Array {
    const n = this.size;
    const T = this.spanS;
    const uStart = -T / 2 + (beta * T * T) / 8;
    const du = T / n;
    if (this.wasm !== null && src.length <= this.wasm.maxSource && src.length >= 4) return this.computeInKernel(src, centre, rateHz, beta, uStart, du, sameSource);
    const frame = this.frame;
    let sum = 0;
    const last = src.length - 1;
    for (let i = 0; i < n; i++) {
      const u = uStart + (i + 0.5) * du;
      const tau = beta === 0 ? u : (Math.sqrt(Math.max(0, 1 + 2 * beta * u)) - 1) / beta;
      const x = centre + tau * rateHz;
      let j = Math.floor(x);
      const f = x - j;
      if (j < 1) j = 1;
      else if (j > last - 2) j = last - 2;
      const p0 = src[j - 1];
      const p1 = src[j];
      const p2 = src[j + 1];
      const p3 = src[j + 2];
      // Catmull-Rom
      const v = p1 + 0.5 * f * (p2 - p0 + f * (2 * p0 - 5 * p1 + 4 * p2 - p3 + f * (3 * (p1 - p2) + p3 - p0)));
      frame[i] = v;
      sum += v;
    }
    const mean = sum / n;
    const w = this.window;
    for (let i = 0; i < n; i++) frame[i] = (frame[i] - mean) * w[i];
    return this.amplitudeOf(frame);
  }

  private amplitudeOf(frame: Float32Array): Float64Array {
    this.fft.powerSpectrum(frame, this.power, this.lines);
    const a = this.amplitude;
    for (let k = 0; k < this.lines; k++) a[k] = Math.sqrt(this.power[k]) * this.scale;
    return a;
  }

  private computeInKernel(src: Float32Array, centre: number, rateHz: number, beta: number, uStart: number, du: number, sameSource: boolean): Float64Array {
    const k = this.wasm as NonNullable<typeof this.wasm>;
    const buffer = k.kernel.memory.buffer;
    let copied = sameSource && src.length === this.copiedLength;
    if (this.views === null || this.views.buffer !== buffer) {
      this.views = { buffer, src: k.kernel.f32(k.src, k.maxSource), frame: k.kernel.f32(k.frame, this.size) };
      copied = false;
    }
    if (!copied) {
      this.views.src.set(src);
      this.copiedLength = src.length;
    }
    k.kernel.fn.warp(k.src, src.length, k.frame, k.window, this.size, centre, rateHz, beta, uStart, du, k.xs);
    return this.amplitudeOf(this.views.frame);
  }
}
