/**
 * Rolling, averaged amplitude spectrum of one sensor channel, fed block by block.
 *
 * Path of a sample: decimator (anti-aliased, optional) -> sliding frame buffer of float32 ->
 * every hop = round(frameSize (1 - overlap)) decimated samples, the last frameSize samples are
 * taken, their mean removed, a periodic Hann window applied and the FFT power computed ->
 * a ring of the last `averages` power spectra with a running sum -> amplitude per line.
 *
 * Amplitude scaling (single-sided, amplitude-correct, RMS per line, input units):
 *   a_k = sqrt(c_k * Pbar_k) / sum(w),  c_k = 2 for 0 < k < N/2, c_0 = c_{N/2} = 1,
 * where Pbar_k is the linear (power) average of |X_k|^2 over the frames in the ring and
 * sum(w) = N * coherentGain (N / 2 for Hann). A sine of peak A centred on line k gives
 * |X_k| = A sum(w) / 2, hence a_k = A / sqrt(2), its RMS. Between lines the peak reads low by the
 * scalloping loss (up to 1.42 dB for Hann): use spectrumMath.interpolatePeak. For broadband RMS
 * over a band, sum a_k^2 and divide by the window's ENBW (spectrumMath.bandRms).
 *
 * Output arrays are reused: the `amplitude` arrays of the frames returned by push() stay valid
 * until the next push() or reset() on the same instance, then get overwritten. A consumer that
 * keeps a spectrum copies it. Each frame of one push has its own array (a pool that grows to the
 * most frames one block has produced). Why: a fresh 4097-line Float64Array per frame measured
 * 3 to 10 us of a 50-85 us frame in the bench (zeroing fresh memory and the GC it brings), 5 to
 * 15 % of the work (bench/spectrumBench.ts, stage "(avoided) new array").
 *
 * Non-finite input: a frame holding NaN or Infinity yields NaN amplitudes, and so does every
 * average that includes it; once it leaves the ring the sum is rebuilt from the ring and the
 * output is clean again. The running sum is also rebuilt from the ring every 64 frames so
 * rounding in the add/subtract cannot accumulate.
 */
import { QbandError } from '../errors.ts';
import { Decimator, isValidDecimation } from './decimator.ts';
import { hannWindow, type HannWindow } from './hannWindow.ts';
import { assertFftSize, type RealFft } from './realFft.ts';
import { SpectrumArrays } from './spectrumArrays.ts';
import { updateAverage } from './frameKernels.ts';

export interface SpectrumFrame {
  /** Event time just after the last sample in the frame (for decimated frames, corrected for the filter delay). */
  tEndS: number;
  /** Sample rate after decimation. */
  sampleRateHz: number;
  /** Line spacing: sampleRateHz / frameSize. */
  binHz: number;
  /**
   * Single-sided RMS amplitude per line k = 0..frameSize/2, in input units: a sine of peak A on a
   * line shows A / sqrt(2) there. Linear power average of the last `averagedFrames` frames.
   * Valid until the next push() or reset() of the RollingSpectrum that made it (of any that
   * share its `outputPool`): copy to keep.
   */
  amplitude: Float64Array;
  /** Frames in the average: 1, 2, ... up to `averages` once the ring has filled. */
  averagedFrames: number;
}

export interface RollingSpectrumOptions {
  inputRateHz: number;
  /** FFT points per frame; must equal fft.size. */
  frameSize: number;
  /** Fraction of a frame shared with the next, 0 <= overlap < 1. */
  overlap: number;
  /** Frames in the running linear power average, >= 1. */
  averages: number;
  /** Power-of-two decimation before the FFT; 1 = none. */
  decimation: number;
  fft: RealFft;
  /**
   * Amplitude arrays shared with other spectra (of the same frame size) whose user copies each
   * frame out before pushing to any of them, as the engine does; absent: the spectrum's own.
   */
  outputPool?: Float64Array[];
}

/** Largest input block handed to the decimator at once (keeps the scratch buffer bounded). */
const DECIMATED_CHUNK = 4096;
/**
 * The decimator's output scratch, one for every spectrum: it is filled and emptied into the
 * frame within one push, and one push runs at a time.
 */
let sharedDecimated: Float32Array | null = null;
const MAX_AVERAGES = 100_000;
/**
 * The running sum is rebuilt from the ring this often. Each incremental step adds a rounding of
 * about 1e-16 of the largest power seen, so after 64 steps a line can be off by ~1e-14 of a past
 * peak, far below anything a spectrum shows; rebuilding costs `averages` passes.
 */
const RESUM_FRAMES = 64;
/** A block stamped further than this from where the previous one ended re-anchors the clock (s). */
const ANCHOR_SLACK_S = 1e-6;

export class RollingSpectrum {
  readonly inputRateHz: number;
  readonly sampleRateHz: number;
  readonly binHz: number;
  readonly frameSize: number;
  /** Decimated samples between the starts of consecutive frames. */
  readonly hopSamples: number;
  readonly averages: number;
  readonly decimation: number;
  readonly window: HannWindow;

  private readonly decimator: Decimator | null;
  private readonly decimated: Float32Array;
  /** Filter delay of the decimator in s, subtracted from frame times. */
  private readonly delayS: number;

  /**
   * The frame (the most recent frameSize decimated samples, oldest first; `fill` of them are
   * valid), the ring of power spectra |X_k|^2 (`next` is the slot the next frame overwrites), the
   * running sum and the newest power spectrum: in the WebAssembly kernel's memory where it runs.
   */
  private readonly arrays: SpectrumArrays;
  private fill = 0;
  /**
   * Frames are stamped with data time counted from an anchor (the first block, or a block whose
   * stamp jumps), so that the stamps do not depend on how the data was cut into blocks.
   */
  private anchorS: number | null = null;
  private inputsSinceAnchor = 0;
  /** 1 where the ring slot holds a frame with a non-finite sample. */
  private readonly ringBad: Uint8Array;
  private ringBadCount = 0;
  /** False while the running sum holds a non-finite value (built from a ring with a bad frame). */
  private sumFinite = true;
  private ringCount = 0;
  private next = 0;
  private framesSinceResum = 0;
  /** Amplitude arrays handed out; the first `poolUsed` belong to frames of the current push. */
  private readonly pool: Float64Array[];
  private poolUsed = 0;
  /** 2 / sum(w)^2: power sum of an interior line to squared RMS amplitude (see header). */
  private readonly interiorScale: number;

  constructor(opts: RollingSpectrumOptions) {
    const { inputRateHz, frameSize, overlap, averages, decimation, fft } = opts;
    this.pool = opts.outputPool ?? [];
    assertFftSize(frameSize);
    const problems: string[] = [];
    if (!(Number.isFinite(inputRateHz) && inputRateHz > 0)) problems.push(`inputRateHz must be finite and > 0, got ${inputRateHz}`);
    if (!(overlap >= 0 && overlap < 1)) problems.push(`overlap must be in [0, 1), got ${overlap}`);
    if (!(Number.isInteger(averages) && averages >= 1 && averages <= MAX_AVERAGES)) {
      problems.push(`averages must be an integer from 1 to ${MAX_AVERAGES}, got ${averages}`);
    }
    if (!isValidDecimation(decimation)) problems.push(`decimation must be a power of two from 1 to 65536, got ${decimation}`);
    if (fft.size !== frameSize) problems.push(`fft.size must equal frameSize ${frameSize}, got ${fft.size}`);
    if (problems.length > 0) throw new QbandError('QB_E_DSP_ARGUMENT', `rolling spectrum: ${problems.join('; ')}`);

    this.inputRateHz = inputRateHz;
    this.frameSize = frameSize;
    this.averages = averages;
    this.decimation = decimation;
    this.sampleRateHz = inputRateHz / decimation;
    this.binHz = this.sampleRateHz / frameSize;
    this.hopSamples = Math.max(1, Math.round(frameSize * (1 - overlap)));
    this.window = hannWindow(frameSize);
    this.decimator = decimation > 1 ? new Decimator(decimation, { precision: 'float32' }) : null;
    this.decimated = this.decimator ? (sharedDecimated ??= new Float32Array(DECIMATED_CHUNK)) : new Float32Array(0);
    this.delayS = this.decimator ? this.decimator.groupDelayInputSamples / inputRateHz : 0;

    this.arrays = new SpectrumArrays(frameSize, averages, this.window.w, fft);
    this.ringBad = new Uint8Array(averages);
    this.interiorScale = 2 / (this.window.sum * this.window.sum);
  }

  /**
   * Gives the arrays' memory back at once (they live in the WebAssembly kernel's memory, which
   * would otherwise wait for garbage collection); the spectrum must not be used after.
   */
  dispose(): void {
    this.arrays.dispose();
    this.decimator?.dispose();
  }

  /** Forgets all history: filter state, partial frame and the average. */
  reset(): void {
    this.arrays.refresh();
    this.decimator?.reset();
    this.fill = 0;
    this.anchorS = null;
    this.inputsSinceAnchor = 0;
    this.poolUsed = 0;
    for (const slot of this.arrays.ring) slot.fill(0); // an unfilled slot must read as zero power
    this.ringBad.fill(0);
    this.ringBadCount = 0;
    this.sumFinite = true;
    this.ringCount = 0;
    this.next = 0;
    this.framesSinceResum = 0;
    this.arrays.sum.fill(0);
  }

  /**
   * Feeds one block. `t0S` is the event time of samples[0] at the input rate; consecutive blocks
   * are assumed contiguous. Returns every frame completed by this block, oldest first.
   */
  push(samples: Float32Array, t0S: number): SpectrumFrame[] {
    if (!Number.isFinite(t0S)) throw new QbandError('QB_E_DSP_ARGUMENT', `block start time must be finite, got ${t0S}`);
    const frames: SpectrumFrame[] = [];
    this.poolUsed = 0; // the previous push's arrays are free again
    this.arrays.refresh();
    if (this.anchorS === null || Math.abs(t0S - (this.anchorS + this.inputsSinceAnchor / this.inputRateHz)) > ANCHOR_SLACK_S) {
      this.anchorS = t0S;
      this.inputsSinceAnchor = 0;
    }
    // Inputs are counted from the anchor: input i of this block is input base + i.
    const base = this.inputsSinceAnchor;
    const anchorS = this.anchorS;
    this.inputsSinceAnchor += samples.length;
    const d = this.decimation;
    if (this.decimator === null) {
      this.consume(samples, samples.length, base, 1, anchorS, frames);
      return frames;
    }
    const chunkIn = DECIMATED_CHUNK * d;
    for (let start = 0; start < samples.length; start += chunkIn) {
      const chunk = samples.subarray(start, Math.min(samples.length, start + chunkIn));
      // The first output of this chunk is produced on chunk input (d - 1 - phase).
      const firstInput = base + start + d - 1 - this.decimator.phase;
      const m = this.decimator.process(chunk, this.decimated);
      this.consume(this.decimated, m, firstInput, d, anchorS, frames);
    }
    return frames;
  }

  /**
   * Appends the first `m` samples of `src` to the frame buffer, emitting a frame whenever it is full.
   * Sample j of src was produced on input firstInput + j * step, counted from the anchor at `anchorS`.
   */
  private consume(src: Float32Array, m: number, firstInput: number, step: number, anchorS: number, frames: SpectrumFrame[]): void {
    const n = this.frameSize;
    const frame = this.arrays.frame;
    let j = 0;
    while (j < m) {
      const take = Math.min(n - this.fill, m - j);
      const f = this.fill + take;
      if (take < 64) {
        for (let i = this.fill; i < f; i++) frame[i] = src[j++];
      } else {
        // A view per copied run (per block, not per sample): set() is a memcpy, several times a JS loop.
        frame.set(src.subarray(j, j + take), this.fill);
        j += take;
      }
      this.fill = f;
      if (f === n) {
        // Last sample in the frame: produced on input firstInput + (j - 1) step, its content
        // delayed by the filter; the frame ends one output period after it.
        const lastInput = firstInput + (j - 1) * step;
        const tEndS = anchorS + (lastInput + step) / this.inputRateHz - this.delayS;
        frames.push(this.emit(tEndS));
        frame.copyWithin(0, this.hopSamples, n);
        this.fill = n - this.hopSamples;
      }
    }
  }

  private emit(tEndS: number): SpectrumFrame {
    const a = this.arrays;
    const finite = Number.isFinite(a.transformFrame()); // any NaN or Infinity in the frame makes the mean non-finite

    const slotIndex = this.next;
    const replacing = this.ringCount === this.averages;
    const leavingBad = replacing && this.ringBad[slotIndex] === 1;
    if (leavingBad) this.ringBadCount--;
    this.ringBad[slotIndex] = finite ? 0 : 1;
    if (!finite) this.ringBadCount++;
    // Incremental only while the sum, the leaving frame and the new frame are all finite, and
    // rebuilt from the ring every RESUM_FRAMES frames so add/subtract rounding cannot pile up.
    const incremental = this.sumFinite && finite && !leavingBad && ++this.framesSinceResum < RESUM_FRAMES;
    if (!replacing) this.ringCount++;
    this.next = this.next + 1 === this.averages ? 0 : this.next + 1;

    if (this.poolUsed === this.pool.length) this.pool.push(new Float64Array(this.frameSize / 2 + 1));
    const amplitude = this.pool[this.poolUsed++];
    const inv = 1 / this.ringCount;
    if (incremental) {
      a.averageInto(slotIndex, this.interiorScale, inv, amplitude);
    } else {
      a.settlePower();
      a.ring[slotIndex].set(a.power);
      this.resum();
      this.sumFinite = this.ringBadCount === 0;
      updateAverage(a.sum, null, null, this.interiorScale, inv, amplitude);
    }
    return { tEndS, sampleRateHz: this.sampleRateHz, binHz: this.binHz, amplitude, averagedFrames: this.ringCount };
  }

  /** Rebuilds the running sum from the frames in the ring. */
  private resum(): void {
    const sum = this.arrays.sum;
    sum.fill(0);
    for (let r = 0; r < this.ringCount; r++) {
      const s = this.arrays.ring[r];
      for (let k = 0; k < sum.length; k++) sum[k] += s[k];
    }
    this.framesSinceResum = 0;
  }
}
