/**
 * The shaft angle at a run of a sensor's decimated samples, filled into a typed array at once
 * (the capture asks for every sample of every sensor): between a tach's once-per-rev marks, or
 * the integral of the known speed without a tach.
 *
 * Sample i of a run stands at data time baseS + (first + i) / rateHz, the same expression the
 * capture uses for its windows. A fill stops at the first sample after `untilS` or whose angle
 * is not known yet (its mark may still come) and returns how many it filled; NaN stands for an
 * angle that will never be known.
 */

/** Where a sensor's samples get their shaft angle (revolutions). */
export interface AngleSource {
  fill(baseS: number, rateHz: number, first: number, count: number, untilS: number, out: Float64Array): number;
}

/** At most this many marks are kept; past it the oldest are dropped down to KEEP_MARKS. */
const MAX_MARKS = 4096;
const KEEP_MARKS = 2048;

/**
 * Once-per-rev marks (time, revolution number) and the angle between them. A lost revolution
 * is a mark of NaN time, so no angle is interpolated across it.
 */
export class MarkAngles implements AngleSource {
  /** Allocated with the first mark (an asset without a tach has none). */
  private t = new Float64Array(0);
  private rev = new Float64Array(0);
  private length = 0;
  /** Marks whose time is not at or after the one before (a NaN mark or the mark after it, or time going back). */
  private breaks = 0;
  private nextRev = 0;
  private readonly maxAgeS: number;

  /** `maxAgeS`: a tach silent for longer than this leaves the samples after its last mark with no angle. */
  constructor(maxAgeS: number) {
    this.maxAgeS = maxAgeS;
  }

  /** The tach restarted: revolution numbering cannot be carried across. */
  clear(): void {
    this.length = 0;
    this.breaks = 0;
  }

  /** One completed revolution from the tach, ending at `tS`. */
  pushRevolution(tS: number, rpm: number): void {
    const n = this.length;
    if (n > 0 && Math.abs(tS - 60 / rpm - this.t[n - 1]) > (0.25 * 60) / rpm) {
      // A lost revolution: start a new numbering so no angle is interpolated across it.
      this.add(Number.NaN, Number.NaN);
    }
    if (n === 0) this.add(tS - 60 / rpm, this.nextRev++);
    this.add(tS, this.nextRev++);
    if (this.length > MAX_MARKS) {
      const drop = this.length - KEEP_MARKS;
      this.t.copyWithin(0, drop, this.length);
      this.rev.copyWithin(0, drop, this.length);
      this.length = KEEP_MARKS;
      this.breaks = 0;
      for (let i = 1; i < this.length; i++) if (!(this.t[i] >= this.t[i - 1])) this.breaks++;
    }
  }

  private add(tS: number, rev: number): void {
    if (this.length === this.t.length) {
      // A call adds up to two marks before the oldest are dropped.
      const t = new Float64Array(Math.max(64, Math.min(2 * this.length, MAX_MARKS + 2)));
      const r = new Float64Array(t.length);
      t.set(this.t);
      r.set(this.rev);
      this.t = t;
      this.rev = r;
    }
    if (this.length > 0 && !(tS >= this.t[this.length - 1])) this.breaks++;
    this.t[this.length] = tS;
    this.rev[this.length++] = rev;
  }

  fill(baseS: number, rateHz: number, first: number, count: number, untilS: number, out: Float64Array): number {
    const t = this.t;
    const revs = this.rev;
    const len = this.length;
    const lastS = len > 0 ? t[len - 1] : Number.NaN;
    // With marks in time order the bracket only moves forward: found by search once, then walked.
    const inOrder = this.breaks === 0 && len > 1;
    let lo = -1;
    for (let i = 0; i < count; i++) {
      const tS = baseS + (first + i) / rateHz;
      if (tS > untilS) return i;
      if (!(tS <= lastS)) {
        // After the last mark (or no marks, or a lost revolution last): it may still come.
        if (untilS - tS > this.maxAgeS) out[i] = Number.NaN;
        else return i;
      } else if (!(tS >= t[0])) {
        out[i] = Number.NaN;
      } else if (inOrder && lo >= 0) {
        while (lo < len - 2 && t[lo + 1] <= tS) lo++;
        out[i] = revs[lo] + (tS - t[lo]) / (t[lo + 1] - t[lo]);
      } else {
        lo = this.search(tS);
        const hi = Math.min(lo + 1, len - 1);
        out[i] = Number.isNaN(t[lo]) || Number.isNaN(t[hi]) ? Number.NaN : revs[lo] + (tS - t[lo]) / (t[hi] - t[lo]);
      }
    }
    return count;
  }

  /**
   * The bracket's first mark by bisection: the last mark at or before `tS` (a NaN mark counts
   * as before), at most the one before last. Marks out of time order make the answer depend on
   * the probes, which is why a walk replaces it only while they are in order.
   */
  private search(tS: number): number {
    const t = this.t;
    let lo = 0;
    let hi = this.length - 1;
    while (hi - lo > 1) {
      const mid = (lo + hi) >> 1;
      if (Number.isNaN(t[mid]) || t[mid] <= tS) lo = mid;
      else hi = mid;
    }
    return lo;
  }
}

/** How often the integrated (tachless) angle looks the speed up (s). */
const SPEED_LOOKUP_S = 0.01;

/** The speed (rpm) at data time tS, or null where unknown. */
export type SpeedAtFn = (tS: number) => number | null;

/**
 * Without a tach: the trapezoidal integral of the speed, per sensor. Whole turns are kept,
 * since speeds come from angle differences across a window; the integral starts again at 0
 * after a stretch of unknown speed (those samples get NaN).
 */
export class IntegratedAngle implements AngleSource {
  /** Set before each fill: the speed known up to this step. */
  speedAt: SpeedAtFn = () => null;
  private running = false;
  private tS = 0;
  private rev = 0;
  private rpm = 0;
  private lookedUpS = 0;
  private lookedUpRpm = 0;

  /** A gap on the sensor: the integral starts again. */
  reset(): void {
    this.running = false;
  }

  fill(baseS: number, rateHz: number, first: number, count: number, untilS: number, out: Float64Array): number {
    const speedAt = this.speedAt;
    let { running, tS: lastS, rev, rpm: lastRpm, lookedUpS, lookedUpRpm } = this;
    let i = 0;
    for (; i < count; i++) {
      const tS = baseS + (first + i) / rateHz;
      if (tS > untilS) break;
      // The speed is looked up every SPEED_LOOKUP_S and held between (the track itself is a
      // line between points tenths of a second apart; the angle error is far below a millirev).
      let rpm: number | null;
      if (running && tS - lookedUpS < SPEED_LOOKUP_S) rpm = lookedUpRpm;
      else {
        rpm = speedAt(tS);
        if (running && rpm !== null) {
          lookedUpS = tS;
          lookedUpRpm = rpm;
        }
      }
      if (rpm === null) {
        running = false;
        out[i] = Number.NaN;
      } else if (!running) {
        running = true;
        lastS = tS;
        rev = 0;
        lastRpm = rpm;
        lookedUpS = tS;
        lookedUpRpm = rpm;
        out[i] = 0;
      } else {
        rev += ((lastRpm + rpm) / 120) * (tS - lastS);
        lastS = tS;
        lastRpm = rpm;
        out[i] = rev;
        // The samples until the next look-up hold this speed: the same sums without the tests above.
        const perS = (rpm + rpm) / 120;
        for (; i + 1 < count; i++) {
          const nextS = baseS + (first + i + 1) / rateHz;
          if (nextS > untilS || !(nextS - lookedUpS < SPEED_LOOKUP_S)) break;
          rev += perS * (nextS - lastS);
          lastS = nextS;
          out[i + 1] = rev;
        }
      }
    }
    this.running = running;
    this.tS = lastS;
    this.rev = rev;
    this.rpm = lastRpm;
    this.lookedUpS = lookedUpS;
    this.lookedUpRpm = lookedUpRpm;
    return i;
  }
}
