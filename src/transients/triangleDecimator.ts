/**
 * A cheap streaming decimator for order tracking: each output is a triangular-weighted sum of
 * the last 2 M - 1 input samples (a boxcar of M convolved with itself, the second-order
 * cascaded integrator-comb response), computed per block of M without running integrators, so
 * floating-point sums never drift over long runs.
 *
 * Response: H(f) = (sin(pi f M / fs) / (M sin(pi f / fs)))^2, zeros at every multiple of the
 * output rate fs / M, so what would alias onto a low frequency f arrives from near those zeros
 * and is attenuated by about (f / (fs / M))^2: -36 dB for f at a 16th of the output rate.
 * Passband droop at f is H(f) (about 1.3 % at a 16th of the output rate): `gainAt` lets
 * callers divide it out. The filter is symmetric, so its delay is exactly M - 1 input samples:
 * an output is stamped at the centre of its span.
 *
 * Each block of M samples gives its plain sum s and its ramp sum r = sum i x_i (i = 0..M-1).
 * The triangle peaks (weight M) on the newest block's first sample; sample i of the newest
 * block weighs M - i and sample i of the block before weighs i, so
 *   y = (M s_m - r_m + r_{m-1}) / M^2,
 * stamped at the newest block's first sample.
 */
import { type CaptureKernel, captureKernel, DECIMATE_CHUNK } from './captureKernel.ts';

export class TriangleDecimator {
  readonly factor: number;
  readonly inputRateHz: number;
  private sum = 0;
  private ramp = 0;
  private fill = 0;
  private prevRamp = 0;
  private havePrev = false;
  /** Time of the first sample of the block being filled. */
  private blockStartS = Number.NaN;
  /** push()'s scratch for pushInto. */
  private times = new Float64Array(0);
  private values = new Float64Array(0);

  constructor(inputRateHz: number, factor: number) {
    if (!Number.isInteger(factor) || factor < 1) throw new RangeError(`decimation factor must be a whole number >= 1, got ${factor}`);
    this.inputRateHz = inputRateHz;
    this.factor = factor;
  }

  get outputRateHz(): number {
    return this.inputRateHz / this.factor;
  }

  /**
   * Feeds samples starting at `t0S`; calls `emit(tS, value)` for each output. Blocks must be
   * contiguous (call `reset` after a gap).
   */
  push(samples: Float32Array, t0S: number, emit: (tS: number, value: number) => void): void {
    const most = this.mostOutputs(samples.length);
    if (this.times.length < most) {
      this.times = new Float64Array(most);
      this.values = new Float64Array(most);
    }
    const n = this.pushInto(samples, t0S, this.times, this.values);
    for (let i = 0; i < n; i++) emit(this.times[i], this.values[i]);
  }

  /** The most outputs a block of `length` samples can give (room for `pushInto`'s arrays). */
  mostOutputs(length: number): number {
    return Math.floor((this.fill + length) / this.factor);
  }

  /**
   * As `push`, writing the outputs' times and values into `times` and `values` (from index 0,
   * room for `mostOutputs(samples.length)`) and returning how many: no call per output, and no
   * number boxed on the way (the capture runs it on every sample of every sensor).
   */
  pushInto(samples: Float32Array, t0S: number, times: Float64Array, values: Float64Array): number {
    const kernel = captureKernel();
    return kernel === null ? this.pushInJavaScript(samples, t0S, times, values) : this.pushInKernel(kernel, samples, t0S, times, values);
  }

  /** pushInto in the WebAssembly kernel (captureKernel.wat), in chunks: the same numbers as in JavaScript. */
  private pushInKernel(kernel: CaptureKernel, samples: Float32Array, t0S: number, times: Float64Array, values: Float64Array): number {
    const m = this.factor;
    const dtS = 1 / this.inputRateHz;
    const norm = 1 / (m * m);
    const state = kernel.decState;
    const counts = kernel.decCounts;
    state[0] = this.sum;
    state[1] = this.ramp;
    state[2] = this.prevRamp;
    state[3] = this.blockStartS;
    counts[0] = this.fill;
    counts[1] = this.havePrev ? 1 : 0;
    let out = 0;
    for (let first = 0; first < samples.length; first += DECIMATE_CHUNK) {
      const length = Math.min(DECIMATE_CHUNK, samples.length - first);
      kernel.decSamples.set(length === samples.length ? samples : samples.subarray(first, first + length));
      const n = kernel.decimate(length, first, t0S, dtS, m, norm);
      for (let i = 0; i < n; i++) {
        times[out + i] = kernel.decTimes[i];
        values[out + i] = kernel.decValues[i];
      }
      out += n;
    }
    this.sum = state[0];
    this.ramp = state[1];
    this.prevRamp = state[2];
    this.blockStartS = state[3];
    this.fill = counts[0];
    this.havePrev = counts[1] === 1;
    return out;
  }

  private pushInJavaScript(samples: Float32Array, t0S: number, times: Float64Array, values: Float64Array): number {
    const m = this.factor;
    const dtS = 1 / this.inputRateHz;
    const norm = 1 / (m * m);
    // The state in locals for the loop (it runs on every sample of every sensor), stored back after.
    let { sum, ramp, fill, prevRamp, havePrev, blockStartS } = this;
    let out = 0;
    const length = samples.length;
    let n = 0;
    while (n < length) {
      if (fill === 0) blockStartS = t0S + n * dtS;
      // The rest of this block (or of the samples): no test per sample.
      const stop = Math.min(length, n + m - fill);
      for (; n < stop; n++) {
        const x = samples[n];
        ramp += fill * x;
        sum += x;
        fill++;
      }
      if (fill < m) break;
      if (havePrev) {
        times[out] = blockStartS;
        values[out++] = (m * sum - ramp + prevRamp) * norm;
      }
      prevRamp = ramp;
      havePrev = true;
      sum = 0;
      ramp = 0;
      fill = 0;
    }
    this.sum = sum;
    this.ramp = ramp;
    this.fill = fill;
    this.prevRamp = prevRamp;
    this.havePrev = havePrev;
    this.blockStartS = blockStartS;
    return out;
  }

  /** Amplitude gain at `freqHz` (1 at DC). */
  gainAt(freqHz: number): number {
    const m = this.factor;
    const x = (Math.PI * freqHz) / this.inputRateHz;
    if (Math.abs(x) < 1e-12) return 1;
    const r = Math.sin(m * x) / (m * Math.sin(x));
    return r * r;
  }

  reset(): void {
    this.sum = 0;
    this.ramp = 0;
    this.fill = 0;
    this.havePrev = false;
  }
}

/** The decimation factor that brings `inputRateHz` down to at least `minOutputRateHz`. */
export function decimationFor(inputRateHz: number, minOutputRateHz: number): number {
  return Math.max(1, Math.floor(inputRateHz / minOutputRateHz));
}
