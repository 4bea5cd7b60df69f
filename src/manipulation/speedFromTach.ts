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
import { TACH_KERNEL_CHUNK, TACH_UNKNOWN, tachKernel } from './tachKernel.ts';

export interface TachSpeedOptions {
  sampleRateHz: number;
  pulsesPerRev: number;
  rangeRpm: [number, number];
}

/** Envelope relaxation time constant, in units of the longest plausible pulse interval. */
const TAU_PULSES = 4;
// The thresholds' fractions of the span (0.6, 0.4 and the mid level 0.5) are in the kernel's
// loop (tachKernel.wat), which runs the edge detection described above.
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
  /** Hysteresis state: TACH_UNKNOWN, TACH_LOW or TACH_HIGH (tachKernel.ts). */
  private state = TACH_UNKNOWN;
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

    // The per-sample loop runs in the kernel (tachKernel.ts), a chunk of samples at a time; it
    // stops at each edge so that onEdge judges it here.
    const k = tachKernel();
    const st = k.state;
    st[0] = this.hi;
    st[1] = this.lo;
    st[2] = this.prevX;
    st[3] = this.crossingS;
    k.hysteresis[0] = this.state;
    const relax = this.relaxPerSample;
    const warmup = this.warmupSamples;
    const originS = this.originS;
    const first = this.sampleCount;
    for (let start = 0; start < samples.length; start += TACH_KERNEL_CHUNK) {
      const n = Math.min(TACH_KERNEL_CHUNK, samples.length - start);
      k.samples.set(n === samples.length ? samples : samples.subarray(start, start + n));
      for (let from = 0; ; ) {
        const at = k.edges(from, n, first + start, relax, warmup, originS, dtS);
        if (at >= n) break;
        this.onEdge(st[3], out);
        st[3] = Number.NaN; // as onEdge leaves it
        from = at + 1;
      }
    }
    this.hi = st[0];
    this.lo = st[1];
    this.prevX = st[2];
    this.crossingS = st[3];
    this.state = k.hysteresis[0];
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
    this.state = TACH_UNKNOWN;
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
