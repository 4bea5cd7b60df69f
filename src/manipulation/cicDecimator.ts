/**
 * A cheap first zoom for paths that only need the bottom of the spectrum: decimation by R with a
 * second-order cascaded integrator-comb response, written as its FIR (a triangle of 2R - 1
 * taps, sum R^2, normalised to unit gain at DC).
 *
 * Response: |H(f)| = |sin(pi f R / fs) / (R sin(pi f / fs))|^2. Its nulls sit on the multiples
 * of the output rate fo = fs / R, where the components that would alias onto low frequencies
 * come from: content at k fo +- b is attenuated by about (pi b / fo)^2, 48 dB for b = fo / 16.
 * Droop at b: the same formula near DC, under 0.1 dB for b <= fo / 16. So keep what is needed
 * below fo / 16 and decimate further with the half-band cascade (decimator.ts).
 *
 * Timing, as decimator.ts: output m is produced on input m R + R - 1 (counted from the last
 * reset) and its content is delayed by R - 1 input samples (the triangle's centre).
 * Cost: about 2 multiply-adds per input sample, eight outputs summed side by side; in the
 * WebAssembly kernel where it loads (`cic` in spectrumKernel.wat: the same sums in the same order,
 * with no bounds check per load), the JavaScript below elsewhere.
 */
import { spectrumKernel, type SpectrumKernel } from './spectrumKernel.ts';

/** Inputs the kernel takes per call: longer blocks go in pieces, which gives the same outputs. */
const KERNEL_BLOCK = 8192;

export class CicDecimator {
  readonly factor: number;
  readonly delayInputSamples: number;
  private readonly taps: Float64Array;
  /**
   * The last 2R - 2 inputs (zeros after a reset), oldest first, then the current block's: each
   * output's window of 2R - 1 inputs lies in one run of it, oldest first.
   */
  private work: Float64Array;
  private count = 0;
  /** The kernel's float32 history and block, taps and outputs (allocated here, never while processing). */
  private readonly wasm: { kernel: SpectrumKernel; work: number; taps: number; out: number } | null;
  private views: { buffer: ArrayBufferLike; work: Float32Array; out: Float32Array } | null = null;

  /** `useKernel` false: the JavaScript loop even where the kernel loads (for the tests). */
  constructor(factor: number, useKernel = true) {
    this.factor = factor;
    this.delayInputSamples = factor - 1;
    const n = 2 * factor - 1;
    this.taps = new Float64Array(n);
    for (let j = 0; j < n; j++) this.taps[j] = (factor - Math.abs(j - (factor - 1))) / (factor * factor);
    this.work = new Float64Array(n - 1 + 1024);
    const kernel = useKernel && factor > 1 ? spectrumKernel() : null;
    if (kernel) {
      const blocks = [
        { ptr: kernel.alloc(4 * (n - 1 + KERNEL_BLOCK)), bytes: 4 * (n - 1 + KERNEL_BLOCK) },
        { ptr: kernel.alloc(8 * n), bytes: 8 * n },
        { ptr: kernel.alloc(4 * (KERNEL_BLOCK / factor + 8)), bytes: 4 * (KERNEL_BLOCK / factor + 8) },
      ];
      kernel.releaseWith(this, blocks);
      kernel.f64(blocks[1].ptr, n).set(this.taps);
      kernel.f32(blocks[0].ptr, n - 1).fill(0);
      this.wasm = { kernel, work: blocks[0].ptr, taps: blocks[1].ptr, out: blocks[2].ptr };
    } else this.wasm = null;
  }

  /** Inputs consumed since the last output (0..factor-1). */
  get phase(): number {
    return this.count;
  }

  reset(): void {
    this.work.fill(0, 0, this.taps.length - 1);
    if (this.wasm) this.kernelViews().work.fill(0, 0, this.taps.length - 1);
    this.count = 0;
  }

  /** Filters and decimates `input`; `out` must hold ceil(input.length / factor). Returns outputs written. */
  process(input: Float32Array, out: Float32Array): number {
    const r = this.factor;
    if (r === 1) {
      out.set(input);
      return input.length;
    }
    if (this.wasm) return this.processInKernel(input, out);
    const taps = this.taps;
    const n = taps.length;
    const h = n - 1;
    if (this.work.length < h + input.length) {
      const bigger = new Float64Array(h + input.length);
      bigger.set(this.work.subarray(0, h));
      this.work = bigger;
    }
    const work = this.work;
    work.set(input, h);
    let written = 0;
    // Input i completes an output when the count reaches r; its window is inputs i - n + 1 .. i,
    // which is work[i .. i + n - 1]. Eight outputs at a time, each summed in tap order as alone
    // (eight independent sums instead of one long chain of dependent additions).
    const len = input.length;
    let i = r - 1 - this.count;
    for (; i + 7 * r < len; i += 8 * r) {
      let a0 = 0, a1 = 0, a2 = 0, a3 = 0, a4 = 0, a5 = 0, a6 = 0, a7 = 0;
      for (let j = 0; j < n; j++) {
        const t = taps[j];
        const b = i + j;
        a0 += t * work[b];
        a1 += t * work[b + r];
        a2 += t * work[b + 2 * r];
        a3 += t * work[b + 3 * r];
        a4 += t * work[b + 4 * r];
        a5 += t * work[b + 5 * r];
        a6 += t * work[b + 6 * r];
        a7 += t * work[b + 7 * r];
      }
      out[written] = a0; out[written + 1] = a1; out[written + 2] = a2; out[written + 3] = a3;
      out[written + 4] = a4; out[written + 5] = a5; out[written + 6] = a6; out[written + 7] = a7;
      written += 8;
    }
    for (; i < len; i += r) {
      let acc = 0;
      for (let j = 0; j < n; j++) acc += taps[j] * work[i + j];
      out[written++] = acc;
    }
    this.count = (this.count + input.length) % r;
    work.copyWithin(0, input.length, input.length + h);
    return written;
  }

  private kernelViews(): { work: Float32Array; out: Float32Array } {
    const k = this.wasm as NonNullable<typeof this.wasm>;
    const buffer = k.kernel.memory.buffer;
    if (this.views === null || this.views.buffer !== buffer) {
      const n = this.taps.length;
      this.views = { buffer, work: k.kernel.f32(k.work, n - 1 + KERNEL_BLOCK), out: k.kernel.f32(k.out, KERNEL_BLOCK / this.factor + 8) };
    }
    return this.views;
  }

  private processInKernel(input: Float32Array, out: Float32Array): number {
    const k = this.wasm as NonNullable<typeof this.wasm>;
    const r = this.factor;
    const n = this.taps.length;
    const h = n - 1;
    const { work, out: outs } = this.kernelViews();
    let written = 0;
    for (let start = 0; start < input.length; start += KERNEL_BLOCK) {
      const len = Math.min(KERNEL_BLOCK, input.length - start);
      work.set(len === input.length ? input : input.subarray(start, start + len), h);
      const m = k.kernel.fn.cic(k.work, r - 1 - this.count, len, k.out, k.taps, n, r);
      for (let q = 0; q < m; q++) out[written + q] = outs[q];
      written += m;
      this.count = (this.count + len) % r;
      work.copyWithin(0, len, len + h);
    }
    return written;
  }
}
