/**
 * Streaming, anti-aliased decimation by a power of two: a cascade of identical half-band FIR
 * stages, each low-pass filtering and keeping every second sample.
 *
 * Each stage is a 59-tap half-band filter (windowed sinc, cut-off at a quarter of the stage's input
 * rate, Kaiser window beta = 9). Half-band: every even-offset tap except the centre is zero and the
 * centre tap is 1/2, so a stage costs 15 multiplies per output sample (symmetric pairs), about 8
 * per input sample; the whole cascade costs less than twice the first stage.
 *
 * Response of one stage (fs = its input rate), and so of the cascade at its output rate fo:
 * - passband edge 0.2 fs = 0.4 fo: content below 0.4 fo is kept and protected from aliases;
 *   spectrum lines above 0.4 fo (0.8 of the output Nyquist) may hold attenuated or aliased content;
 * - stopband from 0.3 fs: whatever folds into the passband is attenuated by the stopband figure.
 * Measured with sines at factors 2 and 8 (test/decimator.test.ts checks it): passband flat within
 * 0.0006 dB up to 0.4 fo; input sines that would fold into 0..0.4 fo come out at least 91 dB down.
 *
 * Timing: each stage delays by (59 - 1) / 2 = 29 of its input samples, so the cascade delays by
 * 29 (factor - 1) input samples (`groupDelayInputSamples`). Output sample m is produced on input
 * sample m*factor + factor - 1 counted from the last reset; `phase` says where the next block starts.
 *
 * With `precision: 'float32'` (the rolling spectra) the stages are decimatorFloat32.ts's: the same
 * last stage, shorter filters before it for the same protection of 0..0.4 fo, and a delay that is
 * the sum of each stage's half length at its own rate.
 */
import { QbandError } from '../errors.ts';
import { spectrumKernel, type SpectrumKernel } from './spectrumKernel.ts';

import { HALF, SIDE_TAPS, TAPS } from './halfBandTaps.ts';
import { Float32Stages } from './decimatorFloat32.ts';

/**
 * Elements past a stage's data that the kernel may read (the last pair's second lane and the
 * odd-offset copy) or write (that lane's output): see halfBand in spectrumKernel.wat.
 */
const KERNEL_SLACK = 8;

export interface DecimatorOptions {
  /** False: the JavaScript stages even where the WebAssembly kernel loads (tests). Default true. */
  kernel?: boolean;
  /** Arithmetic of the stages; default 'float64'. */
  precision?: 'float64' | 'float32';
}

export function isValidDecimation(factor: number): boolean {
  return Number.isInteger(factor) && factor >= 1 && factor <= 1 << 16 && (factor & (factor - 1)) === 0;
}

export class Decimator {
  readonly factor: number;
  /** Delay of the cascade's linear-phase filters, in input samples. */
  readonly groupDelayInputSamples: number;
  private readonly stages: number;
  /**
   * Per stage a work buffer: its last TAPS - 1 inputs (the history, oldest first) followed by the
   * current block's inputs to that stage. A block runs stage by stage over whole arrays, which
   * computes every output with the same products and sums, in the same order, as feeding the
   * cascade one sample at a time, several times faster.
   */
  private work: Float64Array[];
  /** Per stage: 1 when the next input completes a pair and so yields an output. */
  private readonly odd: Uint8Array;
  private inputsSinceOutput = 0;
  /** The WebAssembly stages (null: the JavaScript ones above), computing the same numbers. */
  private readonly wasm: WasmStages | null;

  /** The float32 stages, where the cascade was asked for float32 (null: float64). */
  private readonly single: Float32Stages | null;

  /**
   * `options.kernel` false runs the JavaScript stages even where the WebAssembly kernel loads
   * (tests); `options.precision` 'float32' runs the float32 stages (decimatorFloat32.ts), for
   * callers whose samples are float32 before and after.
   */
  constructor(factor: number, options: DecimatorOptions = {}) {
    if (!isValidDecimation(factor)) {
      throw new QbandError('QB_E_DSP_ARGUMENT', `decimation factor must be a power of two from 1 to 65536, got ${factor}`);
    }
    this.factor = factor;
    this.stages = Math.round(Math.log2(factor));
    const single = options.precision === 'float32' && this.stages > 0;
    this.odd = new Uint8Array(this.stages);
    const kernel = (options.kernel ?? true) && this.stages > 0 ? spectrumKernel() : null;
    this.single = single ? new Float32Stages(this.stages, kernel) : null;
    this.groupDelayInputSamples = this.single ? this.single.groupDelayInputSamples : HALF * (factor - 1);
    this.wasm = kernel && !single ? new WasmStages(kernel, this.stages) : null;
    this.work = this.wasm || single ? [] : Array.from({ length: this.stages }, () => new Float64Array(TAPS - 1 + 256));
  }

  /** Inputs consumed since the last output (0..factor-1): the next output comes after factor - phase more. */
  get phase(): number {
    return this.inputsSinceOutput;
  }

  /**
   * The decimator will not be used again. Nothing to give back: its work buffers in the kernel
   * are shared by every decimator (WasmStages) and its histories are plain arrays.
   */
  dispose(): void {}

  /** Clears the filter history, as if no sample had been seen. */
  reset(): void {
    for (const w of this.work) w.fill(0, 0, TAPS - 1);
    this.wasm?.clearHistory();
    this.single?.clearHistory();
    this.odd.fill(0);
    this.inputsSinceOutput = 0;
  }

  /**
   * Filters and decimates `input`, continuing from the previous block. `out` must hold at least
   * ceil(input.length / factor) samples. Returns the number of samples written to `out`.
   */
  process(input: Float32Array, out: Float32Array): number {
    const n = input.length;
    const need = Math.ceil(n / this.factor);
    if (out.length < need) {
      throw new QbandError(
        'QB_E_DSP_ARGUMENT',
        `decimator output buffer holds ${out.length} samples, needs at least ${need} for ${n} inputs at factor ${this.factor}`,
      );
    }
    if (this.stages === 0) {
      out.set(input);
      return n;
    }
    const fast = this.wasm ?? this.single;
    if (fast !== null) {
      const written = fast.process(input, out, this.odd);
      this.inputsSinceOutput = (this.inputsSinceOutput + n) % this.factor;
      return written;
    }
    const H = TAPS - 1;
    if (this.work[0].length < H + n) {
      // Grows once to the largest block seen; the history moves with it.
      this.work = this.work.map((w) => {
        const bigger = new Float64Array(H + n);
        bigger.set(w.subarray(0, H));
        return bigger;
      });
    }
    const h = SIDE_TAPS;
    const nh = h.length;
    const stages = this.stages;
    let count = n;
    let written = 0;
    this.work[0].set(input, H);
    for (let s = 0; s < stages; s++) {
      const buf = this.work[s];
      const last = s === stages - 1;
      const next = last ? null : this.work[s + 1];
      let m = 0;
      // Input i completes a pair when (odd + i) is odd; its window is buf[i + 1 .. i + TAPS - 1 + 1),
      // centre at buf index H + i - HALF.
      for (let i = this.odd[s] === 1 ? 0 : 1; i < count; i += 2) {
        const c = H + i - HALF;
        let acc = 0.5 * buf[c];
        for (let j = 0; j < nh; j++) {
          const d = 2 * j + 1;
          acc += h[j] * (buf[c - d] + buf[c + d]);
        }
        if (next !== null) next[H + m] = acc;
        else out[m] = acc;
        m++;
      }
      this.odd[s] = (this.odd[s] + count) & 1;
      buf.copyWithin(0, count, count + H);
      if (last) written = m;
      count = m;
    }
    this.inputsSinceOutput = (this.inputsSinceOutput + n) % this.factor;
    return written;
  }
}

/**
 * The cascade's work buffers in the kernel's memory (history of TAPS - 1 inputs, then up to
 * BLOCK inputs, then KERNEL_SLACK), one per stage, with one scratch for the odd-offset copy and
 * one for the last stage's float64 outputs, all shared by every decimator: one runs at a time, so
 * each keeps only its stages' histories (TAPS - 1 doubles a stage, in `history`), put into the
 * work buffers before a call and taken back after. The kernel reads the same values as from
 * buffers of its own (what a decimator held per stage was 17 kB, nearly all of it block space).
 * Longer inputs run BLOCK at a time, which gives the same outputs (each stage keeps its own
 * history). Everything is allocated in the constructor, never while processing: the rolling
 * spectra keep views on the kernel's memory for the length of a push, and an allocation could
 * grow the memory under them.
 */
const BLOCK = 2048;

class WasmStages {
  private readonly kernel: SpectrumKernel;
  private readonly stages: number;
  private readonly taps: number;
  private readonly work: number[];
  private readonly scratch: number;
  private readonly outs: number;
  /** This decimator's own state: per stage its last TAPS - 1 inputs, oldest first. */
  private readonly history: Float64Array;
  private heap = new Float64Array(0);

  constructor(kernel: SpectrumKernel, stages: number) {
    this.kernel = kernel;
    this.stages = stages;
    const had = kernel.hasShared('halfBandTaps');
    this.taps = kernel.sharedBlock('halfBandTaps', 8 * SIDE_TAPS.length);
    this.scratch = kernel.sharedBlock('halfBandOdd', 8 * (BLOCK + 64));
    this.outs = kernel.sharedBlock('halfBandOut', 8 * (BLOCK + KERNEL_SLACK));
    const bytes = 8 * (TAPS - 1 + BLOCK + KERNEL_SLACK);
    this.work = Array.from({ length: stages }, (_, s) => kernel.sharedBlock(`halfBandWork:${s}`, bytes));
    this.history = new Float64Array(stages * (TAPS - 1));
    if (!had) kernel.f64(this.taps, SIDE_TAPS.length).set(SIDE_TAPS);
  }

  /** A view of the whole memory, taken again after the memory grows. */
  private view(): Float64Array {
    if (this.heap.buffer !== this.kernel.memory.buffer) this.heap = new Float64Array(this.kernel.memory.buffer);
    return this.heap;
  }

  clearHistory(): void {
    this.history.fill(0);
  }

  process(input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    const H = TAPS - 1;
    const heap = this.view();
    const halfBand = this.kernel.fn.halfBand;
    for (let s = 0; s < this.stages; s++) heap.set(this.history.subarray(s * H, (s + 1) * H), this.work[s] >> 3);
    let written = 0;
    for (let start = 0; start < input.length; start += BLOCK) {
      const block = input.subarray(start, Math.min(input.length, start + BLOCK));
      heap.set(block, (this.work[0] >> 3) + H);
      let count = block.length;
      for (let s = 0; s < this.stages; s++) {
        const w = this.work[s];
        const dest = s === this.stages - 1 ? this.outs : this.work[s + 1] + 8 * H;
        const m = halfBand(w, count, odd[s] === 1 ? 0 : 1, dest, this.taps, this.scratch);
        odd[s] = (odd[s] + count) & 1;
        heap.copyWithin(w >> 3, (w >> 3) + count, (w >> 3) + count + H);
        count = m;
      }
      out.set(heap.subarray(this.outs >> 3, (this.outs >> 3) + count), written);
      written += count;
    }
    for (let s = 0; s < this.stages; s++) this.history.set(heap.subarray(this.work[s] >> 3, (this.work[s] >> 3) + H), s * H);
    return written;
  }
}
