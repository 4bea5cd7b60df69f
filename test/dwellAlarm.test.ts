import { describe, expect, it } from 'vitest';
import type { AlarmConfig } from '../src/config/types.ts';
import { bandPosition, deadbandHz, separationPct } from '../src/detection/bandPosition.ts';
import { DwellAlarm, type DwellEvent } from '../src/detection/dwellAlarm.ts';
import type { BandPosition } from '../src/detection/bandPosition.ts';

// On-delay, off-delay, deadband and priority are alarm-management terms (ISA-18.2); the
// timings below are chosen by hand so every transition lands on a known step.
const ALARM: AlarmConfig = {
  onDelayS: 3,
  offDelayS: 2,
  deadbandPct: 1,
  priority: 'medium',
  escalateAfterS: 10,
  escalateGrowth: 2,
};

/** Feed a script of [position, seconds] at 0.5 s steps; return events as compact tuples. */
function run(script: Array<[BandPosition, number]>, amplitude: (tS: number) => number | null = () => null) {
  const alarm = new DwellAlarm(ALARM);
  const out: Array<[DwellEvent['event'], number, string]> = [];
  let tS = 0;
  for (const [position, durationS] of script) {
    const end = tS + durationS;
    for (; tS < end - 1e-9; tS += 0.5) {
      for (const e of alarm.step(tS, position, amplitude(tS))) out.push([e.event, e.tS, e.priority]);
    }
  }
  return { out, alarm };
}

describe('band position', () => {
  const band: [number, number] = [13.34, 15.12];
  it('treats an order exactly on either band edge as inside (half-power is reached there)', () => {
    expect(bandPosition(13.34, band, 0.142)).toBe('inside');
    expect(bandPosition(15.12, band, 0.142)).toBe('inside');
  });
  it('puts an order just beyond an edge but within the deadband in the deadband', () => {
    expect(bandPosition(13.3, band, 0.142)).toBe('deadband');
    expect(bandPosition(15.2, band, 0.142)).toBe('deadband');
  });
  it('is outside past the deadband and unknown without a speed', () => {
    expect(bandPosition(13.0, band, 0.142)).toBe('outside');
    expect(bandPosition(null, band, 0.142)).toBe('unknown');
    expect(bandPosition(Number.NaN, band, 0.142)).toBe('unknown');
  });
  it('takes the deadband as a percentage of fn and reports separation in percent of fn', () => {
    expect(deadbandHz(14.2, 1)).toBeCloseTo(0.142, 12);
    expect(separationPct(12.2, band, 14.2)).toBeCloseTo((1.14 / 14.2) * 100, 10);
    expect(separationPct(14.0, band, 14.2)).toBe(0);
  });
});

describe('dwell alarm', () => {
  it('raises once the order has stayed inside for the on-delay, not before', () => {
    const { out } = run([['outside', 1], ['inside', 5]]);
    // Entered at 1.0 s; on-delay 3 s: raise at the first step with dwell >= 3, i.e. 4.0 s.
    expect(out).toEqual([['raise', 4, 'medium']]);
  });

  it('does nothing for a pass shorter than the on-delay', () => {
    expect(run([['outside', 1], ['inside', 2.5], ['outside', 5]]).out).toEqual([]);
  });

  it('restarts the on-delay when the order leaves the band, even into the deadband', () => {
    const { out } = run([['inside', 2.5], ['deadband', 0.5], ['inside', 3.5]]);
    // Second entry at 3.0 s, raise at 6.0 s.
    expect(out).toEqual([['raise', 6, 'medium']]);
  });

  it('never raises on unknown speed', () => {
    expect(run([['unknown', 10]]).out).toEqual([]);
  });

  it('counts a short unknown stretch between two inside steps as spent inside the band', () => {
    // A step at t covers (t - 0.5, t]. Inside at 0..2.0, unknown at 2.5 and 3.0, inside from
    // 3.5: the order was in the band before and after, so it is known to have stayed there
    // since 0.0; the on-delay of 3 s ran out during the stretch and the raise comes with the
    // first known step, 3.5 (pausing the clocks would have raised at 4.0, a restart at 6.5).
    const { out } = run([['inside', 2.5], ['unknown', 1], ['inside', 3.5]]);
    expect(out).toEqual([['raise', 3.5, 'medium']]);
  });

  it('pauses the on-delay over a short unknown stretch that ends elsewhere', () => {
    // Inside at 0..2.0, unknown at 2.5 and 3.0, deadband from 3.5: where the order went in the
    // stretch is not known, so those 1.0 s do not count: still pending, no raise.
    const { out, alarm } = run([['inside', 2.5], ['unknown', 1], ['deadband', 1]]);
    expect(out).toEqual([]);
    expect(alarm.state).toBe('normal');
  });

  it('restarts a pending on-delay after an unknown stretch longer than the on-delay', () => {
    // Unknown 2.5..6.5 s: 4 s > on-delay 3 s; the dwell restarts on re-entry at 6.5 s: 9.5 s.
    const { out } = run([['inside', 2.5], ['unknown', 4], ['inside', 4]]);
    expect(out).toEqual([['raise', 9.5, 'medium']]);
  });

  it('counts a short unknown stretch between two outside steps as spent outside', () => {
    // Raised at 3.0; outside from 4.0 (off-delay 2 s), unknown at 5.5..6.5, outside again from
    // 7.0: the order is known to have stayed out since 4.0, the off-delay ran out in the
    // stretch, and the clear comes with the first known step, 7.0 (pausing would give 8.0).
    const { out } = run([['inside', 4], ['outside', 1], ['unknown', 2], ['outside', 3]]);
    expect(out).toEqual([
      ['raise', 3, 'medium'],
      ['clear', 7, 'medium'],
    ]);
  });

  it('pauses the off-delay over unknown speed that ends back in the band', () => {
    // Raised at 3.0; outside from 4.0, unknown 5.5..6.5, inside from 7.0: the stretch does
    // not count as outside; the alarm is active again and does not clear.
    const { out, alarm } = run([['inside', 4], ['outside', 1], ['unknown', 2], ['inside', 2]]);
    expect(out).toEqual([['raise', 3, 'medium']]);
    expect(alarm.state).toBe('active');
  });

  it('holds an active alarm in the deadband and clears only after the off-delay outside it', () => {
    const { out } = run([['inside', 4], ['deadband', 5], ['outside', 3]]);
    // Raised at 3.0; deadband 4..9 holds; outside from 9.0, off-delay 2 s: clear at 11.0.
    expect(out).toEqual([
      ['raise', 3, 'medium'],
      ['clear', 11, 'medium'],
    ]);
  });

  it('returns to active when the order comes back during the off-delay', () => {
    const { out, alarm } = run([['inside', 4], ['outside', 1.5], ['inside', 1], ['outside', 1.5]]);
    expect(out).toEqual([['raise', 3, 'medium']]);
    expect(alarm.state).toBe('clearing');
  });

  it('keeps an active alarm through unknown speed (no clear from a speed we do not know)', () => {
    const { out, alarm } = run([['inside', 4], ['unknown', 30]]);
    expect(out).toEqual([['raise', 3, 'medium']]);
    expect(alarm.isActive).toBe(true);
  });

  it('escalates one priority step at each multiple of escalate_after_s, up to urgent', () => {
    const { out } = run([['inside', 40]]);
    expect(out).toEqual([
      ['raise', 3, 'medium'],
      ['escalate', 13, 'high'],
      ['escalate', 23, 'urgent'],
    ]);
  });

  it('escalates when the measured amplitude grows by escalate_growth over its value at raise', () => {
    // Amplitude 1.0 until 6 s, then 2.5 (growth 2.5 >= 2).
    const { out } = run([['inside', 8]], (tS) => (tS < 6 ? 1 : 2.5));
    expect(out).toEqual([
      ['raise', 3, 'medium'],
      ['escalate', 6, 'high'],
    ]);
  });

  it('reports the dwell from entering to leaving the band on clear', () => {
    const alarm = new DwellAlarm(ALARM);
    const events: DwellEvent[] = [];
    for (let tS = 10; tS <= 20; tS += 0.5) events.push(...alarm.step(tS, 'inside', null));
    for (let tS = 20.5; tS <= 30; tS += 0.5) events.push(...alarm.step(tS, 'outside', null));
    const clear = events.find((e) => e.event === 'clear');
    expect(clear?.dwellS).toBe(10.5);
    expect(clear?.tS).toBe(22.5);
  });

  it('stops every clock over a pause (no data at all) and counts it once', () => {
    const a = new DwellAlarm(ALARM);
    for (let tS = 0; tS <= 2; tS += 0.5) a.step(tS, 'inside', null); // dwell 2.0 s at 2.0
    a.pause(10); // 2.0 .. 12.0 s: no data
    expect(a.step(12.5, 'inside', null)).toEqual([]); // dwell 2.5
    expect(a.step(13, 'inside', null).map((e) => [e.event, e.dwellS])).toEqual([['raise', 3]]);
  });

  it('resumes from a snapshot exactly where it was', () => {
    const a = new DwellAlarm(ALARM);
    for (let tS = 0; tS <= 2; tS += 0.5) a.step(tS, 'inside', null);
    const b = new DwellAlarm(ALARM, a.snapshot());
    expect(b.step(2.5, 'inside', null)).toEqual([]);
    expect(b.step(3, 'inside', null).map((e) => e.event)).toEqual(['raise']);
  });
});

describe('delays that land exactly on a decision step', () => {
  // Decision times are start + k x step in doubles: 8.1 - 4.1 = 3.9999999999999996 and, at
  // epoch times, the error grows to a few 1e-7 s. A 4 s on-delay entered at the 4.1 s step must
  // raise at the 8.1 s step, not one step later (found by test/dwellTimingOde.test.ts).
  for (const startS of [0, 1_796_200_000]) {
    it(`raises after exactly the on-delay and clears after exactly the off-delay (time origin ${startS} s)`, () => {
      const alarm = new DwellAlarm({ ...ALARM, onDelayS: 4, offDelayS: 2 });
      const events: Array<[string, number]> = [];
      for (let k = 0; k <= 200; k++) {
        const tS = startS + k * 0.1;
        const position: BandPosition = k >= 41 && k < 150 ? 'inside' : 'outside';
        for (const e of alarm.step(tS, position, null)) events.push([e.event, Math.round((e.tS - startS) * 10)]);
      }
      // Entered at step 41 (4.1 s): raise at step 81 (8.1 s); left at step 150: clear at step 170.
      expect(events).toEqual([['raise', 81], ['clear', 170]]);
    });
  }
});
