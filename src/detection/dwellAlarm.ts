/**
 * The dwell alarm of one (component, order) pair, on event time.
 *
 * Alarm-management terms (ISA-18.2): the alarm condition is "the order frequency is inside the
 * component's half-power band". It is raised only after the condition has held without a break
 * for the on-delay; it clears only after the order has stayed beyond the band plus deadband for
 * the off-delay. While it is active it escalates one priority step:
 *   - each time the dwell since raise passes another multiple of `escalateAfterS`, and
 *   - each time the measured order amplitude reaches `escalateGrowth` times the amplitude it had
 *     when the alarm was raised (or at the previous growth escalation).
 * Escalation stops once the priority is `urgent`.
 *
 * Unknown speed never raises, clears or escalates anything: it stops the clocks. The on-delay,
 * off-delay and escalation resume where they were once the speed is known again (a tach that
 * drops out for a second does not restart a dwell that went on), except that an unknown
 * stretch longer than the on-delay restarts a pending on-delay: we can no longer claim the
 * order stayed in the band. An active alarm stays active. A stretch no longer than the
 * on-delay that ends where it began (inside the band before and after, or beyond the deadband
 * before and after) counts as spent there: the order is known to have been in the band from
 * when it entered, so the clocks are given back the time they stood still (speed is
 * continuous; to leave and come back within that time the machine would have had to sweep
 * through the band edge twice). The engine also pauses the clocks
 * over stretches with no data at all (outages, restarts). Shelving is not handled here: a
 * shelved alarm still counts exposure, so shelving belongs to whoever publishes.
 *
 *   normal --inside--> pending --inside for onDelay--> active --outside--> clearing
 *      ^                  |                              ^                    |
 *      +--not inside------+                              +--inside/deadband---+
 *      +------------------------ outside for offDelay ------------------------+
 */
import { PRIORITIES, type AlarmConfig, type Priority } from '../config/types.ts';
import type { BandPosition } from './bandPosition.ts';

export type DwellState = 'normal' | 'pending' | 'active' | 'clearing';

export type DwellEventKind = 'raise' | 'escalate' | 'clear';

export interface DwellEvent {
  event: DwellEventKind;
  tS: number;
  /** Time since the order entered the band (for clear: from entering to leaving it). */
  dwellS: number;
  priority: Priority;
  /** 0 at raise, +1 at each escalation. */
  escalation: number;
  /** Why an escalation happened: 'dwell' or 'growth'; null for raise and clear. */
  reason: 'dwell' | 'growth' | null;
  /** Order amplitude at raise (the reference for growth), when known. */
  amplitudeAtRaise: number | null;
}

/** Everything a dwell alarm needs to resume exactly where it was (restart, hot reload). */
export interface DwellSnapshot {
  state: DwellState;
  enteredS: number | null;
  raisedS: number | null;
  leftS: number | null;
  priority: Priority;
  escalation: number;
  dwellSteps: number;
  growthReference: number | null;
  amplitudeAtRaise: number | null;
  /** Event time of the previous step (to know how long an unknown stretch lasted). */
  lastStepS: number | null;
  /** Length of the current unknown-speed stretch. */
  unknownS: number;
  /** The last known position before the current unknown stretch (null: none yet). */
  knownBefore?: BandPosition | null;
}

/**
 * Slack (s) when a delay is compared with a difference of two decision times. Those are
 * start + k x step in doubles: 8.1 - 4.1 is 3.9999999999999996, and at epoch times (about 1.8e9 s,
 * a double step of 2.4e-7 s) the error is larger still, so an on-delay of exactly 4 s would
 * otherwise wait one decision step too long. A microsecond is far below any step qband takes.
 */
const DELAY_SLACK_S = 1e-6;

export class DwellAlarm {
  private readonly config: AlarmConfig;
  private s: DwellSnapshot;

  constructor(config: AlarmConfig, snapshot?: DwellSnapshot) {
    this.config = config;
    this.s = snapshot ? { ...snapshot } : DwellAlarm.initial(config.priority);
  }

  static initial(priority: Priority): DwellSnapshot {
    return {
      state: 'normal',
      enteredS: null,
      raisedS: null,
      leftS: null,
      priority,
      escalation: 0,
      dwellSteps: 0,
      growthReference: null,
      amplitudeAtRaise: null,
      lastStepS: null,
      unknownS: 0,
    };
  }

  get state(): DwellState {
    return this.s.state;
  }

  /** True while the alarm is raised (active or in its off-delay). */
  get isActive(): boolean {
    return this.s.state === 'active' || this.s.state === 'clearing';
  }

  get priority(): Priority {
    return this.s.priority;
  }

  get escalation(): number {
    return this.s.escalation;
  }

  /** Time since the order entered the band, or null when it is not in a dwell. */
  dwellS(tS: number): number | null {
    return this.s.enteredS === null ? null : tS - this.s.enteredS;
  }

  /**
   * Stop the clocks for `durationS` of data time in which there was no data at all (a data
   * outage, an agent restart): on-delay, off-delay and escalation resume where they were.
   */
  pause(durationS: number): void {
    const s = this.s;
    if (s.enteredS !== null) s.enteredS += durationS;
    if (s.raisedS !== null) s.raisedS += durationS;
    if (s.leftS !== null) s.leftS += durationS;
    if (s.lastStepS !== null) s.lastStepS += durationS;
  }

  snapshot(): DwellSnapshot {
    return { ...this.s };
  }

  /**
   * Advance to event time `tS` with the order's current band position and measured amplitude
   * (null when no spectrum has measured it). Returns the events this step produces, in order.
   */
  step(tS: number, position: BandPosition, amplitude: number | null): DwellEvent[] {
    const s = this.s;
    const events: DwellEvent[] = [];
    const dtS = s.lastStepS === null ? 0 : tS - s.lastStepS;
    s.lastStepS = tS;
    if (position === 'unknown') {
      s.unknownS += dtS;
      this.pause(dtS);
      s.lastStepS = tS;
      if (s.state === 'pending' && s.unknownS > this.config.onDelayS) this.reset(tS);
      return events;
    }
    if (s.unknownS > 0 && s.unknownS <= this.config.onDelayS + DELAY_SLACK_S && s.knownBefore === position && position !== 'deadband') {
      // The stretch began and ended in the same place: it counts as spent there.
      this.pause(-s.unknownS);
      s.lastStepS = tS;
    }
    s.unknownS = 0;
    s.knownBefore = position;
    switch (s.state) {
      case 'normal':
        if (position === 'inside') {
          s.state = 'pending';
          s.enteredS = tS;
          this.raiseIfDue(tS, amplitude, events);
        }
        break;
      case 'pending':
        if (position === 'inside') this.raiseIfDue(tS, amplitude, events);
        else this.reset(tS);
        break;
      case 'active':
        if (position === 'outside') {
          s.state = 'clearing';
          s.leftS = tS;
          this.clearIfDue(tS, events);
        } else {
          this.escalateIfDue(tS, amplitude, events);
        }
        break;
      case 'clearing':
        if (position === 'outside') this.clearIfDue(tS, events);
        else {
          s.state = 'active';
          s.leftS = null;
          this.escalateIfDue(tS, amplitude, events);
        }
        break;
    }
    return events;
  }

  private raiseIfDue(tS: number, amplitude: number | null, events: DwellEvent[]): void {
    const s = this.s;
    const dwellS = tS - (s.enteredS as number);
    if (dwellS < this.config.onDelayS - DELAY_SLACK_S) return;
    s.state = 'active';
    s.raisedS = tS;
    s.priority = this.config.priority;
    s.escalation = 0;
    s.dwellSteps = 0;
    s.growthReference = amplitude;
    s.amplitudeAtRaise = amplitude;
    events.push(this.event('raise', tS, dwellS, null));
  }

  private escalateIfDue(tS: number, amplitude: number | null, events: DwellEvent[]): void {
    const s = this.s;
    if (s.priority === 'urgent') return;
    const sinceRaiseS = tS - (s.raisedS as number);
    const steps = Math.floor((sinceRaiseS + DELAY_SLACK_S) / this.config.escalateAfterS);
    if (steps > s.dwellSteps) {
      s.dwellSteps = steps;
      this.bump(tS, 'dwell', events);
      return;
    }
    if (amplitude === null) return;
    if (s.growthReference === null) {
      // The alarm was raised before any spectrum measured this order: the first measurement
      // becomes the reference for growth.
      s.growthReference = amplitude;
      return;
    }
    if (amplitude >= s.growthReference * this.config.escalateGrowth) {
      s.growthReference = amplitude;
      this.bump(tS, 'growth', events);
    }
  }

  private bump(tS: number, reason: 'dwell' | 'growth', events: DwellEvent[]): void {
    const s = this.s;
    s.priority = PRIORITIES[Math.min(PRIORITIES.indexOf(s.priority) + 1, PRIORITIES.length - 1)];
    s.escalation += 1;
    events.push(this.event('escalate', tS, tS - (s.enteredS as number), reason));
  }

  private clearIfDue(tS: number, events: DwellEvent[]): void {
    const s = this.s;
    if (tS - (s.leftS as number) < this.config.offDelayS - DELAY_SLACK_S) return;
    const dwellS = (s.leftS as number) - (s.enteredS as number);
    events.push(this.event('clear', tS, dwellS, null));
    this.reset(tS);
  }

  private event(event: DwellEventKind, tS: number, dwellS: number, reason: DwellEvent['reason']): DwellEvent {
    const s = this.s;
    return { event, tS, dwellS, priority: s.priority, escalation: s.escalation, reason, amplitudeAtRaise: s.amplitudeAtRaise };
  }

  private reset(tS: number): void {
    this.s = DwellAlarm.initial(this.config.priority);
    this.s.lastStepS = tS;
  }
}
