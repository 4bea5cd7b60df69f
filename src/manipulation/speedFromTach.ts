/**
 * Shaft speed from a tach (pulse) channel: one point per completed revolution.
 *
 * Edge detection, sample by sample, with state kept across blocks so that any split of the
 * stream gives the same points:
 *   - An envelope (hi, lo) follows the signal's extremes and relaxes toward the other one with
 *     time constant TAU_PULSES x the longest plausible pulse interval. The thresholds are
 *     fractions of that span, so a DC offset or a gain change does not matter.
 *   - Hysteresis: the state turns high above lo + 0.6 span and low below lo + 0.4 span; noise
 *     smaller than about 20 % of the span peak to peak cannot make extra edges.
 *   - Each low->high transition is one edge. Its time is the last upward crossing of the
 *     mid level (lo + 0.5 span) before the transition, linearly interpolated between the two
 *     samples that straddle it, so timing is sub-sample.
 * Any pulse shape with one rising edge per mark works: narrow pulses, square waves, and
 * once-per-rev notches of either polarity (a negative-going notch has its rising edge at the
 * notch's trailing side; the speed is the same, only the phase reference differs).
 *
 * Speed: rpm = 60 / T_rev with T_rev the time from an edge to the edge pulsesPerRev edges
 * later, so unequally spaced marks on a multi-mark wheel do not modulate the result.
 * Plausibility (every refusal counts in `rejected`):
 *   - an edge sooner than a mark interval at 2 x max rpm after the previous edge, or more than
 *     MAX_STEP_RATIO shorter than the same mark's interval one revolution earlier, is dropped
 *     as a glitch, and the revolution count restarts at the next edge that is not early (we
 *     cannot tell whether the glitch or the edge before it was the false one);
 *   - an interval longer than one revolution at 0.5 x min rpm, or more than MAX_STEP_RATIO
 *     longer than the same mark's last one, means a mark was lost: the count restarts there;
 *   - a revolution whose speed falls outside 0.5 x min .. 2 x max rpm gives no point.
 * The first slowest-revolution of data after construction or reset() only trains the envelope
 * (no edges), so noise before the first real pulse cannot make edges.
 * A late glitch (in the last quarter of an interval) passes as an edge but makes the next real
 * edge look early, so a revolution is reported only once the following edge is accepted as
 * consistent: points come out one mark interval after the edge they are stamped with.
 * Limitation: with pulsesPerRev > 1 and unequal marks, a lost mark that happens to leave the
 * intervals within MAX_STEP_RATIO shifts the mark pairing until the count restarts.
 */
import type { SpeedPoint } from './speedPoint.ts';

export interface TachSpeedOptions {
  sampleRateHz: number;
  pulsesPerRev: number;
  rangeRpm: [number, number];
}

/** Envelope relaxation time constant, in units of the longest plausible pulse interval. */
const TAU_PULSES = 4;
const HIGH_FRACTION = 0.6;
const LOW_FRACTION = 0.4;
const MID_FRACTION = 0.5;
/** Edge detector states (small integers: the per-sample loop compares them). */
const UNKNOWN = 0;
const LOW = 1;
const HIGH = 2;
/**
 * Largest change of a mark interval from one revolution to the next that we believe (ratio).
 * Shaft inertia keeps real speed changes over one revolution far smaller at operating speed;
 * a glitch or a lost mark changes an interval by a factor of 1.4 or more in most positions.
 */
const MAX_STEP_RATIO = 1.3;

export class TachSpeed {
  private readonly sampleRateHz: number;
  private readonly pulsesPerRev: number;
  private readonly minRevS: number;
  private readonly maxRevS: number;
  private readonly minPulseS: number;
  private readonly relaxPerSample: number;
  private readonly warmupSamples: number;

  // Streaming state.
  private sampleCount = 0; // samples seen since construction/reset
  private originS = 0; // data time of sample 0
  private nextT0S = Number.NaN; // expected t0S of the next block
  private hi = 0;
  private lo = 0;
  private prevX = Number.NaN;
  /** Hysteresis state: UNKNOWN, LOW or HIGH. */
  private state = UNKNOWN;
  private crossingS = Number.NaN; // last upward mid-level crossing while low
  private lastEdgeS = Number.NaN;
  private lastRawEdgeS = Number.NaN; // last detected edge, accepted or not
  private revStartS = Number.NaN; // accepted edge that started the current revolution
  /** Accepted mark intervals of the last revolution, by mark position (NaN: not yet seen). */
  private readonly intervalsS: Float64Array;
  private markIndex = 0;
  private glitchPending = false;
  /** Revolution waiting for the next consistent edge to confirm that its end edge was real. */
  private unconfirmed: SpeedPoint | null = null;
  private rejectedCount = 0;

  constructor(opts: TachSpeedOptions) {
    const { sampleRateHz, pulsesPerRev, rangeRpm } = opts;
    if (!(sampleRateHz > 0) || !Number.isFinite(sampleRateHz)) {
      throw new RangeError(`TachSpeed: sampleRateHz must be > 0, got ${sampleRateHz}`);
    }
    if (!Number.isInteger(pulsesPerRev) || pulsesPerRev < 1) {
      throw new RangeError(`TachSpeed: pulsesPerRev must be an integer >= 1, got ${pulsesPerRev}`);
    }
    const [minRpm, maxRpm] = rangeRpm;
    if (!(minRpm > 0) || !(maxRpm >= minRpm) || !Number.isFinite(maxRpm)) {
      throw new RangeError(`TachSpeed: rangeRpm must be [min, max] with 0 < min <= max, got [${rangeRpm.join(', ')}]`);
    }
    this.sampleRateHz = sampleRateHz;
    this.pulsesPerRev = pulsesPerRev;
    this.minRevS = 60 / (2 * maxRpm);
    this.maxRevS = 60 / (0.5 * minRpm);
    this.minPulseS = this.minRevS / pulsesPerRev;
    // Longest plausible wait between two edges is one slowest revolution (pulses may be
    // unevenly spaced); the envelope must remember a pulse for several of those.
    const longestGapS = this.maxRevS;
    this.relaxPerSample = 1 / (TAU_PULSES * longestGapS * sampleRateHz);
    this.warmupSamples = Math.ceil(longestGapS * sampleRateHz);
    this.intervalsS = new Float64Array(pulsesPerRev).fill(Number.NaN);
  }

  /** Edges or revolutions refused as implausible since construction or reset(). */
  get rejected(): number {
    return this.rejectedCount;
  }

  /**
   * Feed one block. `t0S` is the data time of samples[0]. A block that does not start where
   * the previous one ended (more than half a sample off) is a gap: the revolution count
   * restarts, the envelope is kept.
   */
  push(samples: Float32Array, t0S: number): SpeedPoint[] {
    const out: SpeedPoint[] = [];
    if (samples.length === 0) return out;
    const dtS = 1 / this.sampleRateHz;
    if (this.sampleCount === 0) {
      this.originS = t0S;
    } else if (!(Math.abs(t0S - this.nextT0S) <= 0.5 * dtS)) {
      // Gap or overlap: times from here on are rebased and no period spans the gap.
      this.originS = t0S - this.sampleCount * dtS;
      this.lastEdgeS = Number.NaN;
      this.lastRawEdgeS = Number.NaN;
      this.prevX = Number.NaN;
      this.crossingS = Number.NaN;
    }

    const relax = this.relaxPerSample;
    let hi = this.hi;
    let lo = this.lo;
    let prevX = this.prevX;
    // The per-sample state in locals (this loop runs on every tach sample), stored back after.
    let state = this.state;
    let crossingS = this.crossingS;
    const originS = this.originS;
    const warmup = this.warmupSamples;
    const first = this.sampleCount;
    for (let i = 0; i < samples.length; i++) {
      const x = samples[i];
      const n = first + i;
      if (!Number.isFinite(x)) {
        // A bad sample breaks timing continuity: forget the pending crossing.
        prevX = Number.NaN;
        crossingS = Number.NaN;
        continue;
      }
      if (n === 0) {
        hi = x;
        lo = x;
      } else {
        const span = hi - lo;
        hi = x > hi ? x : hi - span * relax;
        lo = x < lo ? x : lo + span * relax;
      }
      const span = hi - lo;
      if (span > 0) {
        const mid = lo + MID_FRACTION * span;
        if (state !== HIGH && !Number.isNaN(prevX) && prevX < mid && x >= mid) {
          // Linear interpolation of the crossing between samples n-1 and n.
          const frac = (mid - prevX) / (x - prevX);
          crossingS = originS + (n - 1 + frac) * dtS;
        }
        if (x > lo + HIGH_FRACTION * span) {
          if (state === LOW && n >= warmup && !Number.isNaN(crossingS)) {
            this.onEdge(crossingS, out);
            crossingS = Number.NaN; // as onEdge leaves it
          }
          state = HIGH;
        } else if (x < lo + LOW_FRACTION * span) {
          state = LOW;
        }
      }
      prevX = x;
    }
    this.hi = hi;
    this.lo = lo;
    this.prevX = prevX;
    this.state = state;
    this.crossingS = crossingS;
    this.sampleCount += samples.length;
    this.nextT0S = this.originS + this.sampleCount * dtS;
    return out;
  }

  reset(): void {
    this.sampleCount = 0;
    this.originS = 0;
    this.nextT0S = Number.NaN;
    this.hi = 0;
    this.lo = 0;
    this.prevX = Number.NaN;
    this.state = UNKNOWN;
    this.crossingS = Number.NaN;
    this.lastEdgeS = Number.NaN;
    this.lastRawEdgeS = Number.NaN;
    this.glitchPending = false;
    this.unconfirmed = null;
    this.rejectedCount = 0;
  }

  private onEdge(edgeS: number, out: SpeedPoint[]): void {
    this.crossingS = Number.NaN;
    const rawS = edgeS - this.lastRawEdgeS; // NaN for the first edge
    this.lastRawEdgeS = edgeS;
    if (Number.isNaN(this.lastEdgeS)) {
      this.startChain(edgeS);
      return;
    }
    const intervalS = edgeS - this.lastEdgeS;
    if (intervalS > this.maxRevS) {
      this.rejectedCount++; // no pulse for a whole slowest revolution: pulses were lost
      this.startChain(edgeS);
      return;
    }
    const refS = this.intervalsS[this.markIndex]; // same mark, one revolution earlier
    if (rawS < this.minPulseS || intervalS < this.minPulseS || intervalS * MAX_STEP_RATIO < refS) {
      this.rejectedCount++; // too early: a glitch, or the train is too fast to count
      this.glitchPending = true;
      return;
    }
    if (intervalS > refS * MAX_STEP_RATIO) {
      this.rejectedCount++; // a mark went missing (or the count is off): start again here
      this.startChain(edgeS);
      return;
    }
    if (this.glitchPending) {
      // An early edge came between the last accepted edge and this one: either of the two may
      // have been the glitch, so neither the waiting revolution nor this interval is trusted.
      this.startChain(edgeS);
      return;
    }
    if (this.unconfirmed !== null) {
      out.push(this.unconfirmed); // this consistent edge confirms the previous revolution's end
      this.unconfirmed = null;
    }
    this.intervalsS[this.markIndex] = intervalS;
    this.markIndex = (this.markIndex + 1) % this.pulsesPerRev;
    this.lastEdgeS = edgeS;
    if (this.markIndex !== 0) return;
    const revS = edgeS - this.revStartS;
    this.revStartS = edgeS;
    if (revS < this.minRevS || revS > this.maxRevS) {
      this.rejectedCount++;
      return;
    }
    this.unconfirmed = { tS: edgeS, rpm: 60 / revS, confidence: 1, source: 'tach' };
  }

  private startChain(edgeS: number): void {
    this.lastEdgeS = edgeS;
    this.revStartS = edgeS;
    this.markIndex = 0;
    this.intervalsS.fill(Number.NaN);
    this.glitchPending = false;
    this.unconfirmed = null; // its edge may have been the glitch
  }
}
