/**
 * Averages per-revolution tach speeds over the last few revolutions.
 *
 * A tach edge timed on a slow sample clock is off by up to about half a sample, so one
 * revolution's speed jitters by (half a sample / revolution period): 0.3 % at 2560 Hz and
 * 850 rpm, enough to rock an order back and forth across a deadband of 1 % of fn. Over k
 * revolutions the two end edges carry the same error but the period is k times longer, so the
 * jitter falls by k. The averaged speed is stamped at the middle of the span it covers, so a
 * steady ramp is not delayed by the averaging.
 *
 * Each input point is one revolution ending at `tS` at `rpm` (so it began 60 / rpm earlier);
 * consecutive points are consecutive revolutions. A gap (a revolution's start not matching the
 * previous end within a quarter of its period) restarts the average.
 */
import type { SpeedPoint } from './speedPoint.ts';

export class SpeedAverage {
  private readonly revs: number;
  private readonly periodsS: Float64Array;
  private readonly endsS: Float64Array;
  private count = 0;
  private next = 0;

  constructor(revolutions: number) {
    if (!Number.isInteger(revolutions) || revolutions < 1) {
      throw new RangeError(`SpeedAverage: revolutions must be a whole number >= 1, got ${revolutions}`);
    }
    this.revs = revolutions;
    this.periodsS = new Float64Array(revolutions);
    this.endsS = new Float64Array(revolutions);
  }

  /** Add one revolution; returns the averaged point over up to the last `revolutions`. */
  push(p: SpeedPoint): SpeedPoint {
    const periodS = 60 / p.rpm;
    if (this.count > 0) {
      const lastEndS = this.endsS[(this.next + this.revs - 1) % this.revs];
      if (Math.abs(p.tS - periodS - lastEndS) > periodS / 4) this.count = 0;
    }
    this.periodsS[this.next] = periodS;
    this.endsS[this.next] = p.tS;
    this.next = (this.next + 1) % this.revs;
    this.count = Math.min(this.count + 1, this.revs);
    let spanS = 0;
    for (let i = 1; i <= this.count; i++) spanS += this.periodsS[(this.next - i + this.revs) % this.revs];
    return { tS: p.tS - spanS / 2, rpm: (60 * this.count) / spanS, confidence: p.confidence, source: p.source };
  }

  reset(): void {
    this.count = 0;
    this.next = 0;
  }
}
