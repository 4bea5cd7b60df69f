/**
 * Tachless shaft speed that follows run-ups and coast-downs: the speed path of a vibration
 * channel, separate from its evidence spectra.
 *
 * 1. Its own zoom: the channel is decimated (a CIC stage, then half-band stages) to about 4 x
 *    the highest harmonic searched (HARMONICS x range top), and kept in a short buffer.
 * 2. Every TRACKER_HOP_S of data, one frame of T = FRAME_REVS_AT_MIN revolutions at the bottom
 *    of the range and at least MIN_FRAME_S (so the estimator's 1X lies at least that many lines
 *    from DC) is resampled in warped time against a speed that changes linearly across the
 *    frame (`warpedSpectrum.ts`), and `estimateSpeedFromSpectrum` finds 1X in it with its
 *    harmonic comb, family resolution and confidence. The answer is the speed at the frame's
 *    centre.
 * 3. The relative slope beta of the warp comes from the track: a least-squares line through
 *    the trusted estimates of the last PREDICT_WINDOW_S (`trackHistory.ts`) predicts the speed and slope at the
 *    frame's centre; the frames at beta0 + m d (m = -2..2) are scored by the sharpness of their
 *    harmonic comb (`combSharpness.ts`), the search climbs on while the best is at an end (a
 *    ramp starting or ending), the peak is interpolated and the frame at that beta gives the
 *    estimate. With no track (start, after a gap, after losing it) a grid over the slopes that
 *    ramps of MAX_RAMP_SHARE_PER_S of the range top per second need is scored instead.
 *    A slope that is wrong only smears each line symmetrically about its true place, so the
 *    slope chosen affects the sharpness of the lines (and so the confidence), not the centre.
 *    While the track holds, the search is skipped: one frame at the predicted slope (quietSlope.ts);
 *    while the speed holds as well, every second frame is skipped, and read after all when the
 *    frame after it shows movement (its samples are still in the buffer).
 * 4. Steady running: while the track is slow enough, the last frames (up to MAX_AVERAGED) are
 *    power-averaged and the average read too (`steadyAverage.ts`).
 * 5. Continuity: with a track, 1X is looked for within JUMP_SHARE of the prediction, so it
 *    cannot jump to a harmonic, a subharmonic or a structural line, and a rival family
 *    elsewhere in the range (a structural hump the speed is passing) does not lower the
 *    confidence. The whole range is still searched at each frame: a confident family away
 *    from the track for LOST_AFTER_S drops the track, and the next frame starts afresh.
 *
 * Internally it counts time in its own decimated samples (exact, whatever the blocks), and
 * stamps its answers with data time counted from one anchor (the first block, or a block whose
 * stamp jumps): the answers do not depend on how the data was cut into blocks.
 *
 * What it assumes: the speed is close to linear over one frame (T is 1.33 s for a range from
 * 450 rpm); where the slope changes inside a frame (the start or end of a ramp) the estimate
 * is the frame's average speed, off by about 0.07 x (slope change) x T. Speed below the range
 * or a 1X that does not stand out of the noise gives low confidence, as it should.
 */
import { CicDecimator } from './cicDecimator.ts';
import { Decimator } from './decimator.ts';
import { estimateSpeedFromSpectrum, highestLineRead, type SpectralSpeed } from './speedFromSpectrum.ts';
import type { SpeedPoint } from './speedPoint.ts';
import { combSharpness } from './combSharpness.ts';
import { FrameSpectra } from './frameSpectra.ts';
import { QuietSlope } from './quietSlope.ts';
import type { RealFft } from './realFft.ts';
import { clampBeta, searchSlope, type Trial } from './slopeSearch.ts';
import { SteadyAverage } from './steadyAverage.ts';
import { TrackHistory } from './trackHistory.ts';
import { maxBeta, WarpedSpectrum } from './warpedSpectrum.ts';

/** Harmonics in the estimator's comb (its default). */
const HARMONICS = 5;
/** Frame length in revolutions at the bottom of the range (the estimator needs 8 or more). */
const FRAME_REVS_AT_MIN = 10;
/** Shortest frame (s): one of 10 revolutions at 1200 rpm (0.5 s) leaves too many real machines in doubt. */
const MIN_FRAME_S = 1;
/** A block stamped further than this from where the previous one ended re-anchors the clock (s). */
const ANCHOR_SLACK_S = 1e-6;
/** Data time between estimates (s). */
export const TRACKER_HOP_S = 0.2;
/** Steepest ramp searched without a track, as a share of the range top per second. */
const MAX_RAMP_SHARE_PER_S = 0.3;
/** Beta grid points without a track. */
const GRID_POINTS = 13;
/** With a track, 1X is looked for within this share of the predicted speed. */
const JUMP_SHARE = 0.12;
/** A confident family elsewhere for this long (s of data) means the track is lost. */
const LOST_AFTER_S = 1.0;
/** Most frames averaged while steady, and how close the average's answer must be to a trusted frame's. */
const MAX_AVERAGED = 8;
const AGREE_SHARE = 0.0025;
/** Smallest beta step of the search with a track (1/s). */
const MIN_BETA_STEP = 0.01;

export interface TachlessTrackerOptions {
  /** Sample rate of the channel (Hz). */
  inputRateHz: number;
  /** Operating range [min, max] (rpm). */
  rangeRpm: [number, number];
  /** Estimates at or above this confidence predict the next frames. */
  minConfidence: number;
  /**
   * A transform of the backend the frames use (any size; the tracker makes its own from it):
   * the engine passes its own (pffft where it loads). fft.js when absent.
   */
  fft?: RealFft;
}


export class TachlessTracker {
  /** Frame length (s) and how far an estimate lags the newest sample (s). */
  readonly frameS: number;
  readonly lagS: number;
  readonly rateHz: number;
  private readonly inputRateHz: number;
  private readonly rangeRpm: [number, number];
  private readonly minConfidence: number;
  private readonly cic: CicDecimator;
  private readonly decimator: Decimator;
  private readonly factor: number;
  private phase = 0;
  private cicOut = new Float32Array(0);
  private readonly delayS: number;
  private readonly warped: WarpedSpectrum;
  private readonly frameSamples: number;
  private readonly hopSamples: number;
  private readonly betaMax: number;
  private buf: Float32Array;
  private fill = 0;
  private anchorS: number | null = null;
  private inputsSinceAnchor = 0;
  /** Decimated samples since the last reset. */
  private samplesSeen = 0;
  private sinceEmit = 0;
  private decimated = new Float32Array(0);
  private readonly history: TrackHistory;
  /** The last steady frames' power average (step 4). */
  private readonly steady: SteadyAverage;
  /** This frame's warped spectra by slope (each computed once). */
  private readonly spectra: FrameSpectra;
  /** Data time a confident family away from the track has lasted (s). */
  private awayS = 0;
  /** Whether the slope search may be skipped (a quiet spell of the track). */
  private readonly quiet = new QuietSlope();
  /** The frame skipped at the last hop (its centre's data time and clock time), until the next is read. */
  private skipped: { centreS: number; clockS: number } | null = null;
  /** The buffer as far as it is filled, for the frame being estimated (one view per frame). */
  private src: Float32Array = new Float32Array(0);

  constructor(opts: TachlessTrackerOptions) {
    this.inputRateHz = opts.inputRateHz;
    this.rangeRpm = opts.rangeRpm;
    this.minConfidence = opts.minConfidence;
    this.history = new TrackHistory(opts.minConfidence, TRACKER_HOP_S);
    const fMinHz = opts.rangeRpm[0] / 60;
    const fMaxHz = opts.rangeRpm[1] / 60;
    let factor = 1;
    while (opts.inputRateHz / (factor * 2) >= 4 * HARMONICS * fMaxHz && factor < 1 << 16) factor *= 2;
    // A cheap CIC stage takes the rate down to 16 x the highest harmonic or more, half-band
    // stages do the rest (about 2 instead of 15 multiply-adds per input sample at 25.6 kHz).
    let cic = 1;
    while (cic < factor && opts.inputRateHz / (cic * 2) >= 16 * HARMONICS * fMaxHz) cic *= 2;
    this.cic = new CicDecimator(cic);
    this.decimator = new Decimator(factor / cic);
    this.factor = factor;
    this.delayS = (this.cic.delayInputSamples + cic * this.decimator.groupDelayInputSamples) / opts.inputRateHz;
    this.rateHz = opts.inputRateHz / factor;
    this.frameS = Math.max(FRAME_REVS_AT_MIN / fMinHz, MIN_FRAME_S);
    this.frameSamples = Math.ceil(this.frameS * this.rateHz);
    this.hopSamples = Math.max(1, Math.round(TRACKER_HOP_S * this.rateHz));
    let size = 64;
    while (size < this.frameSamples) size *= 2;
    // Two samples of margin either side for the interpolation, and room for a few hops.
    this.buf = new Float32Array(this.frameSamples + 4 + 8 * this.hopSamples);
    // Every estimate and comb score reads lines below those of an estimate over the whole range.
    this.warped = new WarpedSpectrum(size, this.frameS, this.buf.length, true, highestLineRead(size / 2 + 1, 1 / this.frameS, opts.rangeRpm, HARMONICS) + 1, opts.fft);
    this.spectra = new FrameSpectra(this.warped);
    this.steady = new SteadyAverage({
      maxFrames: MAX_AVERAGED,
      spectrumLines: size / 2 + 1,
      linesKept: this.warped.lines,
      harmonics: HARMONICS,
      frameS: this.frameS,
      hopS: TRACKER_HOP_S,
      minConfidence: opts.minConfidence,
      agreeShare: AGREE_SHARE,
    });
    this.betaMax = Math.min(maxBeta(this.frameS), (MAX_RAMP_SHARE_PER_S * fMaxHz) / fMinHz);
    // A resting quiet spell reads every second frame: the next estimate may come two hops on.
    this.lagS = this.frameS / 2 + (2 * this.hopSamples + 2) / this.rateHz + this.delayS;
  }

  /** Forget everything (after a gap): the next frames start without a track. */
  reset(): void {
    this.cic.reset();
    this.decimator.reset();
    this.phase = 0;
    this.anchorS = null;
    this.inputsSinceAnchor = 0;
    this.fill = 0;
    this.samplesSeen = 0;
    this.sinceEmit = 0;
    this.history.clear();
    this.awayS = 0;
    this.steady.clear();
    this.quiet.close();
    this.skipped = null;
  }

  /**
   * Feeds one block (contiguous with the previous one) whose first sample was taken at `t0S`.
   * Returns the estimates it completes, oldest first, with rpm null where none was found (the
   * time still says how far the source has spoken).
   */
  push(samples: Float32Array, t0S: number): Array<SpeedPoint | { tS: number; rpm: null }> {
    const out: Array<SpeedPoint | { tS: number; rpm: null }> = [];
    const d = this.factor;
    if (this.cicOut.length < Math.ceil(samples.length / this.cic.factor)) this.cicOut = new Float32Array(Math.ceil(samples.length / this.cic.factor));
    if (this.decimated.length < Math.ceil(samples.length / d) + 1) this.decimated = new Float32Array(Math.ceil(samples.length / d) + 1);
    // Data time is counted from an anchor (the first block, or the first after a jump in the
    // blocks' own stamps), so that the answers do not depend on how the data was cut.
    if (this.anchorS === null || Math.abs(t0S - (this.anchorS + this.inputsSinceAnchor / this.inputRateHz)) > ANCHOR_SLACK_S) {
      this.anchorS = t0S;
      this.inputsSinceAnchor = 0;
    }
    // Output j of this block is produced on block input firstInput + j d (both stages keep that rule).
    const firstInput = this.inputsSinceAnchor + d - 1 - this.phase;
    this.phase = (this.phase + samples.length) % d;
    this.inputsSinceAnchor += samples.length;
    const anchorS = this.anchorS;
    const mc = this.cic.process(samples, this.cicOut);
    const m = this.decimator.process(this.cicOut.subarray(0, mc), this.decimated);
    const need = this.frameSamples + 4;
    // The buffer keeps a hop more than a frame: a skipped frame can still be read at the next hop.
    const keep = need + this.hopSamples;
    for (let j = 0; j < m; j++) {
      if (this.fill === this.buf.length) {
        this.buf.copyWithin(0, this.fill - keep, this.fill);
        this.fill = keep;
      }
      this.buf[this.fill++] = this.decimated[j];
      this.samplesSeen++;
      this.sinceEmit++;
      if (this.sinceEmit >= this.hopSamples && this.fill >= need) {
        this.sinceEmit = 0;
        // Content time of the newest sample, then of the frame's centre (2 samples of margin).
        const newestS = anchorS + (firstInput + j * d) / this.inputRateHz - this.delayS;
        const centre = this.fill - 3 - (this.frameSamples - 1) / 2;
        const centreS = newestS - (this.fill - 1 - centre) / this.rateHz;
        // The tracker reasons on its own sample count, exact whatever the blocks, and stamps
        // its answers with data time.
        const clockS = (this.samplesSeen - this.fill + centre) / this.rateHz;
        // A quiet spell rests: this frame is skipped (no rival family may be in sight).
        if (this.awayS === 0 && this.quiet.rest()) {
          this.history.skipped(clockS);
          this.skipped = { centreS, clockS };
          continue;
        }
        const point = this.estimate(centre, centreS, clockS);
        // A sign of movement right after a skipped frame: that frame is read after all, so the
        // track has every frame around the change.
        const late = this.skipped !== null && !this.quiet.settled ? this.readSkipped(centre - this.hopSamples, this.skipped.centreS, this.skipped.clockS) : null;
        if (late !== null) out.push(late);
        this.skipped = null;
        out.push(point);
      }
    }
    return out;
  }

  private estimate(centre: number, centreS: number, clockS: number): SpeedPoint | { tS: number; rpm: null } {
    this.spectra.begin();
    this.src = this.buf.subarray(0, this.fill);
    const predicted = this.history.predict(clockS);
    const prediction = predicted && { hz: predicted.hz, beta: this.clampBeta(predicted.beta) };
    let est: SpectralSpeed;
    if (prediction) {
      // Follow the track: the family within JUMP_SHARE of the predicted speed...
      const near = this.nearOf(prediction.hz);
      const step = this.stepOf(prediction.hz);
      const best = near[0] < near[1] ? this.followSlope(centre, prediction, step, near) : null;
      // ...while the whole range is watched for a confident family elsewhere: a track that
      // went astray (onto a structural line, say) is dropped once that has lasted LOST_AFTER_S.
      const wholeBeta = best?.beta ?? prediction.beta;
      let whole = this.estimateAt(centre, wholeBeta, this.rangeRpm, true);
      // Its confidence counts only where it names a speed away from the track or stands in for a
      // missing near answer (the same frame again: its spectrum and floors are kept).
      if (whole.rpm !== null && (!best || Math.abs(whole.rpm / 60 / prediction.hz - 1) > JUMP_SHARE)) whole = this.estimateAt(centre, wholeBeta, this.rangeRpm);
      const away = whole.rpm !== null && whole.confidence >= this.minConfidence && Math.abs(whole.rpm / 60 / prediction.hz - 1) > JUMP_SHARE;
      this.awayS = away ? this.awayS + TRACKER_HOP_S : 0;
      if (this.awayS >= LOST_AFTER_S) {
        this.history.clear();
        this.quiet.close();
        this.awayS = 0;
        this.steady.clear();
        est = whole;
      } else if (best && !away) est = this.averageWhileSteady(best.est, best.beta, prediction, centre, clockS, near);
      else {
        this.steady.clear();
        est = best?.est ?? whole;
      }
    } else {
      this.quiet.close();
      // No track: frames that themselves look steady (their best slope is the grid's middle)
      // are averaged as well, so that a steady machine whose single frames stay in doubt
      // still starts a track.
      const step = (2 * this.betaMax) / (GRID_POINTS - 1);
      const best = this.search(centre, 0, step, (GRID_POINTS - 1) / 2, this.rangeRpm);
      est = best.est;
      if (Math.abs(best.beta) < step / 2) est = this.averageWhileSteady(est, 0, { hz: 1, beta: 0 }, centre, clockS, this.rangeRpm);
      else this.steady.clear();
    }
    if (est.rpm === null) return { tS: centreS, rpm: null };
    this.history.remember({ clockS, hz: est.rpm / 60, confidence: est.confidence });
    return { tS: centreS, rpm: est.rpm, confidence: est.confidence, source: 'spectrum' };
  }

  /** Where 1X is looked for with a track (within JUMP_SHARE of the predicted speed), rpm. */
  private nearOf(hz: number): [number, number] {
    return [Math.max(this.rangeRpm[0], hz * 60 * (1 - JUMP_SHARE)), Math.min(this.rangeRpm[1], hz * 60 * (1 + JUMP_SHARE))];
  }

  /** The slope search's step with a track (1/s). */
  private stepOf(hz: number): number {
    return Math.max(MIN_BETA_STEP, 0.5 / (hz * this.frameS * this.frameS));
  }

  /**
   * A skipped frame read after all, at the next hop: the slope search around the track's
   * prediction for it, kept when trusted. Only the track's history takes it (the quiet spell, the steady average
   * and the watch over the whole range went on with the frame after it).
   */
  private readSkipped(centre: number, centreS: number, clockS: number): SpeedPoint | null {
    const predicted = this.history.predict(clockS);
    if (!predicted) return null;
    const hz = predicted.hz;
    const near = this.nearOf(hz);
    if (!(near[0] < near[1])) return null;
    this.spectra.begin();
    const est = this.search(centre, this.clampBeta(predicted.beta), this.stepOf(hz), 2, near).est;
    // Only a trusted answer joins the track: an untrusted one would only make the skipped time unknown.
    if (est.rpm === null || est.confidence < this.minConfidence) return null;
    this.history.remember({ clockS, hz: est.rpm / 60, confidence: est.confidence });
    return { tS: centreS, rpm: est.rpm, confidence: est.confidence, source: 'spectrum' };
  }

  /** Step 4: this frame into the steady average, and the answer (`steadyAverage.ts`). */
  private averageWhileSteady(short: SpectralSpeed, beta: number, prediction: { hz: number; beta: number }, centre: number, clockS: number, near: [number, number]): SpectralSpeed {
    return this.steady.read(short, this.spectra.at(this.src, centre, this.rateHz, beta), clockS, this.warped.binHz, prediction, near);
  }

  /**
   * With a track: the frame at the predicted slope alone while the speed holds (a predicted
   * slope within one search step of none), a quiet spell lasts and its reading holds
   * (`quietSlope.ts`), else the slope search around the prediction.
   */
  private followSlope(centre: number, prediction: { hz: number; beta: number }, step: number, near: [number, number]): Trial {
    const beta0 = prediction.beta;
    if (this.quiet.open()) {
      const t = this.trial(centre, beta0, near);
      const onTrack = t.est.rpm !== null && t.est.confidence >= this.minConfidence && Math.abs(t.est.rpm / 60 / prediction.hz - 1) <= AGREE_SHARE;
      if (this.quiet.accept(t.comb, onTrack, Math.abs(beta0) < step / 2)) return t;
    }
    const best = this.search(centre, beta0, step, 2, near);
    this.quiet.searched(Math.abs(best.beta - beta0) <= step / 2, best.comb);
    return best;
  }

  /** The slope search around beta0 (`slopeSearch.ts`); only the chosen trial's confidence is worked out. */
  private search(centre: number, beta0: number, step: number, half: number, rangeRpm: [number, number]): Trial {
    const chosen = searchSlope((beta) => this.trial(centre, beta, rangeRpm, true), this.betaMax, beta0, step, half);
    return { beta: chosen.beta, est: this.estimateAt(centre, chosen.beta, rangeRpm), comb: chosen.comb };
  }

  private clampBeta(beta: number): number {
    return clampBeta(beta, this.betaMax);
  }

  private trial(centre: number, beta: number, rangeRpm: [number, number] = this.rangeRpm, speedOnly = false): Trial {
    const est = this.estimateAt(centre, beta, rangeRpm, speedOnly);
    const amplitude = this.spectra.at(this.src, centre, this.rateHz, beta);
    const comb = est.rpm === null ? 0 : combSharpness(amplitude, est.rpm / 60 / this.warped.binHz, HARMONICS);
    return { beta, est, comb };
  }

  /** The estimate alone (no comb score) of the frame at slope `beta` (`speedOnly`: without its confidence). */
  private estimateAt(centre: number, beta: number, rangeRpm: [number, number], speedOnly = false): SpectralSpeed {
    const amplitude = this.spectra.at(this.src, centre, this.rateHz, beta);
    return estimateSpeedFromSpectrum(amplitude, this.warped.binHz, rangeRpm, { harmonics: HARMONICS, floors: this.spectra.floorsOf(amplitude), speedOnly });
  }
}
