import { describe, expect, it } from 'vitest';
import { BUSY_HIGH, BUSY_LOW, BusyMeter } from '../src/agent/busyMeter.ts';

// The overload rule as a script on a virtual clock: shedding starts above BUSY_HIGH of a
// window's wall time, and ends only below BUSY_LOW (hysteresis, so it does not flap).
describe('overload rule (BusyMeter)', () => {
  it('starts shedding above the high share, holds between the two, stops below the low share', () => {
    const m = new BusyMeter();
    expect(m.sample(1000)).toBeNull(); // opens the first window
    const window = (busyShare: number, endMs: number) => {
      m.add(busyShare * 1000);
      return m.sample(endMs);
    };
    expect(window(BUSY_HIGH - 0.05, 2000)).toBeNull();
    expect(window(BUSY_HIGH + 0.05, 3000)).toEqual({ shedding: true, busy: BUSY_HIGH + 0.05 });
    expect(m.shedding).toBe(true);
    expect(window((BUSY_HIGH + BUSY_LOW) / 2, 4000)).toBeNull(); // between: still shedding
    expect(m.shedding).toBe(true);
    expect(window(BUSY_LOW - 0.05, 5000)).toEqual({ shedding: false, busy: BUSY_LOW - 0.05 });
    expect(m.shedding).toBe(false);
  });
});
