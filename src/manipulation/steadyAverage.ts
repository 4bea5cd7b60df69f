/**
 * The tachless tracker's steady running (tachlessTracker.ts, step 4): lines that one short frame
 * leaves in the noise stand out of the power average of the last few frames (each warped for
 * its own slope). Frames are averaged only while the track is trusted and so slow that the 5th
 * harmonic moves by under half a line across them, and the answer (moved to this frame's centre
 * along the predicted slope) is taken only within the track's window, when trusted, and when
 * this frame's own answer is not trusted or agrees within the tracker's AGREE_SHARE; a trusted
 * disagreement (a ramp starting) empties the average.
 *
 * Each frame is kept with its time on the tracker's clock: while the track is quiet the tracker
 * reads every second frame only, and the span the average covers (at most that of maxFrames
 * frames a hop apart), and the move of its answer to this frame's centre, follow the frames'
 * own times.
 */
import { speedMovedTo } from './namedSpeed.ts';
import { estimateSpeedFromSpectrum, highestLineRead, type SpectralSpeed } from './speedFromSpectrum.ts';

export interface SteadyAverageOptions {
  /** Most frames averaged. */
  maxFrames: number;
  /** Lines per spectrum (size / 2 + 1), and how many of them from DC up the frames carry. */
  spectrumLines: number;
  linesKept: number;
  /** Harmonics of the estimator's comb. */
  harmonics: number;
  /** Frame length (s) and the tracker's hop (s). */
  frameS: number;
  hopS: number;
  minConfidence: number;
  agreeShare: number;
}

export class SteadyAverage {
  private readonly opts: SteadyAverageOptions;
  /** Power spectra of the last steady frames (ring), their clock times, and the average's amplitude. */
  private readonly powers: Float64Array[];
  private readonly clocks: Float64Array;
  private readonly out: Float64Array;
  private frames = 0;

  constructor(opts: SteadyAverageOptions) {
    this.opts = opts;
    this.powers = Array.from({ length: opts.maxFrames }, () => new Float64Array(opts.spectrumLines));
    this.clocks = new Float64Array(opts.maxFrames);
    this.out = new Float64Array(opts.spectrumLines);
  }

  /** Empties the average. */
  clear(): void {
    this.frames = 0;
  }

  /**
   * Adds this frame (`amplitude`, at `clockS` on the tracker's clock) and returns the answer:
   * the average's where it stands, else `short`, this frame's own.
   */
  read(short: SpectralSpeed, amplitude: Float64Array, clockS: number, binHz: number, prediction: { hz: number; beta: number }, near: [number, number]): SpectralSpeed {
    const o = this.opts;
    const slopeHzS = prediction.beta * prediction.hz;
    // Data time across which the 5th harmonic moves by half a line.
    const slowS = 0.5 / Math.max(o.harmonics * Math.abs(slopeHzS) * o.frameS, 1e-9);
    if (slowS < o.hopS) {
      this.frames = 0;
      return short;
    }
    // At most the span of maxFrames frames a hop apart: frames read every second hop (a resting
    // quiet spell) are fewer, not older, so that a slope the track's noise predicts does not
    // move the average's answer further.
    const spanS = Math.min(slowS, (o.maxFrames - 1) * o.hopS);
    const max = o.maxFrames;
    const slot = this.frames % max;
    const kept = this.powers[slot];
    // Every estimate of an average reads only the lines the frames have (its range lies within the tracker's).
    for (let k = 0; k < o.linesKept; k++) kept[k] = amplitude[k] * amplitude[k];
    this.clocks[slot] = clockS;
    this.frames++;
    // The newest frames within the span (a hop's rounding of slack).
    let frames = 1;
    while (frames < Math.min(max, this.frames) && clockS - this.clocks[(this.frames - 1 - frames) % max] <= spanS + 1e-9) frames++;
    if (frames < 2) return short;
    // Only the lines the estimate reads are averaged (the others keep old values, never read).
    const avg = this.out;
    const lines = highestLineRead(avg.length, binHz, near, o.harmonics) + 1;
    avg.fill(0, 0, lines);
    let sumClockS = 0;
    for (let f = 0; f < frames; f++) {
      const i = (this.frames - 1 - f) % max;
      const src = this.powers[i];
      for (let k = 0; k < lines; k++) avg[k] += src[k];
      sumClockS += clockS - this.clocks[i];
    }
    for (let k = 0; k < lines; k++) avg[k] = Math.sqrt(avg[k] / frames);
    const long = estimateSpeedFromSpectrum(avg, binHz, near, { harmonics: o.harmonics });
    if (long.rpm === null || long.confidence < o.minConfidence) return short;
    // The average reads the speed at its frames' mean time: moved along the slope to this frame's centre.
    const rpm = long.rpm + slopeHzS * 60 * (sumClockS / frames);
    const shortTrusted = short.rpm !== null && short.confidence >= o.minConfidence;
    if (shortTrusted && Math.abs(rpm / (short.rpm as number) - 1) > o.agreeShare) {
      this.frames = 0;
      return short;
    }
    if (shortTrusted && short.confidence >= long.confidence) return short;
    // (Not a spread, which would format the reason through its getter.)
    return speedMovedTo(long, rpm);
  }
}
