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
 * Output arrays: every emitted frame carries its own newly allocated `amplitude` array, so a
 * consumer may keep it. Reusing a pool of arrays was measured in bench/spectrumBench.ts and saved
 * too little to justify the aliasing hazard (see the bench's printout for the figures).
 *
 * Non-finite input: a frame holding NaN or Infinity yields NaN amplitudes, and so does every
 * average that includes it; once it leaves the ring the sum is rebuilt from the ring and the
 * output is clean again. The running sum is also rebuilt from the ring every `averages` frames so
 * rounding in the add/subtract cannot accumulate.
 */
import { QbandError } from '../errors.ts';
import { Decimator, isValidDecimation } from './decimator.ts';
import { hannWindow, type HannWindow } from './hannWindow.ts';
import { assertFftSize, type RealFft } from './realFft.ts';

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
}

/** Largest input block handed to the decimator at once (keeps the scratch buffer bounded). */
const DECIMATED_CHUNK = 4096;
const MAX_AVERAGES = 100_000;

/** Mean of frame. */
export function frameMean(frame: Float32Array): number {
  let s = 0;
  for (let i = 0; i < frame.length; i++) s += frame[i];
  return s / frame.length;
}

/** out[i] = (frame[i] - mean) * w[i]. */
export function removeMeanAndWindow(frame: Float32Array, mean: number, w: Float32Array, out: Float32Array): void {
  for (let i = 0; i < frame.length; i++) out[i] = (frame[i] - mean) * w[i];
}

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

  private readonly fft: RealFft;
  private readonly decimator: Decimator | null;
  private readonly decimated: Float32Array;
  /** Filter delay of the decimator in s, subtracted from frame times. */
  private readonly delayS: number;

  /** The most recent frameSize decimated samples, oldest first; `fill` of them are valid. */
  private readonly frame: Float32Array;
  private fill = 0;
  private readonly windowed: Float32Array;

  /** Ring of power spectra |X_k|^2; `next` is the slot the next frame overwrites. */
  private readonly ring: Float64Array[];
  /** 1 where the ring slot holds a frame with a non-finite sample. */
  private readonly ringBad: Uint8Array;
  private ringBadCount = 0;
  private ringCount = 0;
  private next = 0;
  private framesSinceResum = 0;
  private readonly powerSum: Float64Array;
  /** c_k / sum(w)^2 per line (see header). */
  private readonly lineScale: Float64Array;

  constructor(opts: RollingSpectrumOptions) {
    const { inputRateHz, frameSize, overlap, averages, decimation, fft } = opts;
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
    this.fft = fft;
    this.window = hannWindow(frameSize);
    this.decimator = decimation > 1 ? new Decimator(decimation) : null;
    this.decimated = new Float32Array(this.decimator ? DECIMATED_CHUNK : 0);
    this.delayS = this.decimator ? this.decimator.groupDelayInputSamples / inputRateHz : 0;

    this.frame = new Float32Array(frameSize);
    this.windowed = new Float32Array(frameSize);
    const lines = frameSize / 2 + 1;
    this.ring = Array.from({ length: averages }, () => new Float64Array(lines));
    this.ringBad = new Uint8Array(averages);
    this.powerSum = new Float64Array(lines);
    this.lineScale = new Float64Array(lines);
    const sumW2 = this.window.sum * this.window.sum;
    for (let k = 0; k < lines; k++) this.lineScale[k] = (k === 0 || k === lines - 1 ? 1 : 2) / sumW2;
  }

  /** Forgets all history: filter state, partial frame and the average. */
  reset(): void {
    this.decimator?.reset();
    this.fill = 0;
    this.ringBad.fill(0);
    this.ringBadCount = 0;
    this.ringCount = 0;
    this.next = 0;
    this.framesSinceResum = 0;
    this.powerSum.fill(0);
  }

  /**
   * Feeds one block. `t0S` is the event time of samples[0] at the input rate; consecutive blocks
   * are assumed contiguous. Returns every frame completed by this block, oldest first.
   */
  push(samples: Float32Array, t0S: number): SpectrumFrame[] {
    if (!Number.isFinite(t0S)) throw new QbandError('QB_E_DSP_ARGUMENT', `block start time must be finite, got ${t0S}`);
    const frames: SpectrumFrame[] = [];
    const d = this.decimation;
    if (this.decimator === null) {
      this.consume(samples, samples.length, 0, 1, t0S, frames);
      return frames;
    }
    const chunkIn = DECIMATED_CHUNK * d;
    for (let start = 0; start < samples.length; start += chunkIn) {
      const chunk = samples.subarray(start, Math.min(samples.length, start + chunkIn));
      // The first output of this chunk is produced on chunk input (d - 1 - phase).
      const firstInput = start + d - 1 - this.decimator.phase;
      const m = this.decimator.process(chunk, this.decimated);
      this.consume(this.decimated, m, firstInput, d, t0S, frames);
    }
    return frames;
  }

  /**
   * Appends the first `m` samples of `src` to the frame buffer, emitting a frame whenever it is full.
   * Sample j of src was produced on block input index firstInput + j * step.
   */
  private consume(src: Float32Array, m: number, firstInput: number, step: number, t0S: number, frames: SpectrumFrame[]): void {
    const n = this.frameSize;
    const frame = this.frame;
    let j = 0;
    while (j < m) {
      const take = Math.min(n - this.fill, m - j);
      let f = this.fill;
      for (let end = j + take; j < end; j++) frame[f++] = src[j];
      this.fill = f;
      if (f === n) {
        // Last sample in the frame: produced on input firstInput + (j - 1) step, its content
        // delayed by the filter; the frame ends one output period after it.
        const lastInput = firstInput + (j - 1) * step;
        const tEndS = t0S + (lastInput + step) / this.inputRateHz - this.delayS;
        frames.push(this.emit(tEndS));
        frame.copyWithin(0, this.hopSamples, n);
        this.fill = n - this.hopSamples;
      }
    }
  }

  private emit(tEndS: number): SpectrumFrame {
    const mean = frameMean(this.frame);
    const finite = Number.isFinite(mean); // any NaN or Infinity in the frame makes the sum non-finite
    removeMeanAndWindow(this.frame, mean, this.window.w, this.windowed);

    const slot = this.ring[this.next];
    const replacing = this.ringCount === this.averages;
    const wasBad = replacing && this.ringBad[this.next] === 1;
    this.framesSinceResum++;
    const incremental = this.ringBadCount === 0 && finite && this.framesSinceResum < this.averages;
    const sum = this.powerSum;
    const lines = sum.length;
    if (incremental && replacing) for (let k = 0; k < lines; k++) sum[k] -= slot[k];

    this.fft.powerSpectrum(this.windowed, slot);

    if (wasBad) this.ringBadCount--;
    this.ringBad[this.next] = finite ? 0 : 1;
    if (!finite) this.ringBadCount++;
    if (!replacing) this.ringCount++;
    this.next = this.next + 1 === this.averages ? 0 : this.next + 1;

    const amplitude = new Float64Array(lines);
    const inv = 1 / this.ringCount;
    const scale = this.lineScale;
    if (incremental) {
      for (let k = 0; k < lines; k++) {
        const p = sum[k] + slot[k];
        sum[k] = p;
        // Clamp rounding below zero; NaN passes through (NaN < 0 is false).
        amplitude[k] = Math.sqrt((p < 0 ? 0 : p) * scale[k] * inv);
      }
    } else {
      this.resum();
      for (let k = 0; k < lines; k++) {
        const p = sum[k];
        amplitude[k] = Math.sqrt((p < 0 ? 0 : p) * scale[k] * inv);
      }
    }
    return { tEndS, sampleRateHz: this.sampleRateHz, binHz: this.binHz, amplitude, averagedFrames: this.ringCount };
  }

  /** Rebuilds the running sum from the frames in the ring. */
  private resum(): void {
    const sum = this.powerSum;
    sum.fill(0);
    for (let r = 0; r < this.ringCount; r++) {
      const s = this.ring[r];
      for (let k = 0; k < sum.length; k++) sum[k] += s[k];
    }
    this.framesSinceResum = 0;
  }
}
