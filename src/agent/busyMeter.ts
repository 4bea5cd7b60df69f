/**
 * The agent's overload rule: the agent processes each message to completion (there is no queue
 * inside it, so memory stays flat); what it cannot take waits in TCP and at the broker. When
 * handling messages takes more than BUSY_HIGH of wall time over a tick, every asset sheds its
 * spectra (speed and dwell decisions go on exactly) until the share falls below BUSY_LOW. Shed
 * blocks are counted in each asset's state (`overload_shed_blocks`).
 */

/** Shares of wall time spent handling messages that start and end the overload rule. */
export const BUSY_HIGH = 0.85;
export const BUSY_LOW = 0.6;

export class BusyMeter {
  /** Wall time spent handling messages since the last sample, and when that window began. */
  private busyMs = 0;
  private windowStartMs = 0;
  private overloaded = false;

  /** Wall time (ms) one message took to handle. */
  add(ms: number): void {
    this.busyMs += ms;
  }

  get shedding(): boolean {
    return this.overloaded;
  }

  /**
   * Closes the window at `nowMs` (a monotonic clock). Returns the busy share when the rule
   * switches (shedding starts or ends), else null.
   */
  sample(nowMs: number): { shedding: boolean; busy: number } | null {
    const windowMs = nowMs - this.windowStartMs;
    if (this.windowStartMs === 0 || windowMs <= 0) {
      this.windowStartMs = nowMs;
      this.busyMs = 0;
      return null;
    }
    const busy = this.busyMs / windowMs;
    this.windowStartMs = nowMs;
    this.busyMs = 0;
    const next = this.overloaded ? busy > BUSY_LOW : busy > BUSY_HIGH;
    if (next === this.overloaded) return null;
    this.overloaded = next;
    return { shedding: next, busy };
  }
}
