/**
 * Recognises run-ups and coast-downs in a stream of speeds taken at a fixed step of data time.
 *
 * A sweep is a run of speed in one direction. It starts at the last turning point or steady
 * spell and ends when the speed turns back by more than the hysteresis, stays within the
 * hysteresis of its extreme for `holdS`, or is lost (a trip to rest, a dropout). It counts as
 * a transient when it covered at least `minSweepPct` of the top speed at a mean rate of at
 * least `minRatePctPerS` of the top speed per second. Hysteresis: 0.5 % of the top speed, so
 * the ripple of a speed estimate does not split a ramp.
 */
import type { TransientSettings } from './transientSettings.ts';

export interface Sweep {
  direction: 'up' | 'down';
  startS: number;
  endS: number;
  fromRpm: number;
  toRpm: number;
  endedBy: 'steady' | 'reversed' | 'speed-lost' | 'end-of-data';
}

const HYSTERESIS_SHARE = 0.005;

export class SweepDetector {
  private readonly topRpm: number;
  private readonly settings: TransientSettings;
  /** Where the current run started (a turning point or the end of a steady spell). */
  private anchor: { tS: number; rpm: number } | null = null;
  /** The run's extreme so far and when it was reached. */
  private extreme: { tS: number; rpm: number } | null = null;
  /** The last point where the run had moved on by more than the hysteresis. */
  private mark: { tS: number; rpm: number } | null = null;
  private direction: 'up' | 'down' | null = null;
  private lastKnown: { tS: number; rpm: number } | null = null;

  constructor(topRpm: number, settings: TransientSettings) {
    this.topRpm = topRpm;
    this.settings = settings;
  }

  /** The sweep in progress, if the speed is moving (its start and where it has got to). */
  get inProgress(): { startS: number; direction: 'up' | 'down' } | null {
    return this.anchor && this.direction ? { startS: this.anchor.tS, direction: this.direction } : null;
  }

  /**
   * Where the current run starts (its anchor), or null with no speed yet or since one was lost.
   * It only moves later: a sweep not yet reported starts here or later (at a later step where
   * there is no anchor).
   */
  get anchorS(): number | null {
    return this.anchor ? this.anchor.tS : null;
  }

  /**
   * One speed sample (null: unknown); returns a sweep that just ended and qualifies. A dropout
   * shorter than `holdS` (a tachless estimate losing the track for a moment) does not split a
   * sweep; a longer one ends it where the speed was last known.
   */
  step(tS: number, rpm: number | null): Sweep | null {
    if (rpm === null) {
      if (this.lastKnown && tS - this.lastKnown.tS <= this.settings.holdS) return null;
      const done = this.finish('speed-lost', this.lastKnown);
      this.anchor = null;
      this.direction = null;
      this.lastKnown = null;
      return done;
    }
    this.lastKnown = { tS, rpm };
    const h = HYSTERESIS_SHARE * this.topRpm;
    if (!this.anchor) {
      this.anchor = { tS, rpm };
      return null;
    }
    if (this.direction === null || !this.extreme || !this.mark) {
      const move = rpm - this.anchor.rpm;
      if (Math.abs(move) > h) {
        this.direction = move > 0 ? 'up' : 'down';
        this.extreme = { tS, rpm };
        this.mark = { tS, rpm };
      } else if (Math.abs(move) <= h / 2) {
        // Still at the steady level: a run, when it comes, starts from the last such point.
        this.anchor = { tS, rpm: this.anchor.rpm };
      }
      return null;
    }
    const sign = this.direction === 'up' ? 1 : -1;
    if (sign * (rpm - this.extreme.rpm) > 0) this.extreme = { tS, rpm };
    if (sign * (rpm - this.mark.rpm) > h) this.mark = { tS, rpm };
    if (sign * (this.extreme.rpm - rpm) > h) {
      const turn = this.extreme;
      const done = this.finish('reversed', turn);
      // The new run starts at the turning point and is already moving.
      this.anchor = turn;
      this.direction = rpm > turn.rpm ? 'up' : 'down';
      this.extreme = { tS, rpm };
      this.mark = { tS, rpm };
      return done;
    }
    if (tS - this.mark.tS > this.settings.holdS) {
      const done = this.finish('steady', { tS: this.mark.tS, rpm: this.extreme.rpm });
      this.anchor = { tS, rpm };
      this.direction = null;
      return done;
    }
    return null;
  }

  /** The data ended: a sweep in progress that qualifies is reported. */
  end(): Sweep | null {
    const done = this.finish('end-of-data', this.lastKnown);
    this.anchor = null;
    this.direction = null;
    return done;
  }

  private finish(endedBy: Sweep['endedBy'], end: { tS: number; rpm: number } | null): Sweep | null {
    if (!this.anchor || !this.direction || !end) return null;
    const spanRpm = Math.abs(end.rpm - this.anchor.rpm);
    const durationS = end.tS - this.anchor.tS;
    if (durationS <= 0) return null;
    const top = this.topRpm;
    if (spanRpm < (this.settings.minSweepPct / 100) * top) return null;
    if (spanRpm / durationS < (this.settings.minRatePctPerS / 100) * top) return null;
    return {
      direction: this.direction,
      startS: this.anchor.tS,
      endS: end.tS,
      fromRpm: this.anchor.rpm,
      toRpm: end.rpm,
      endedBy,
    };
  }
}
