/**
 * Transient capture's parts on hand-made inputs: the sweep detector on speed scripts whose
 * answers are read off the script, the decimator against its closed-form response, and the
 * order demodulator on a tone of known amplitude and phase.
 */
import { describe, expect, it } from 'vitest';
import { demodulateOrder } from '../src/transients/orderDemodulation.ts';
import { SweepDetector, type Sweep } from '../src/transients/sweepDetector.ts';
import { TriangleDecimator } from '../src/transients/triangleDecimator.ts';
import { DEFAULT_TRANSIENT_SETTINGS } from '../src/transients/transientSettings.ts';

/** Steps the detector every 0.1 s through speed(t) from 0 to endS; returns the sweeps it reports. */
function run(speed: (t: number) => number | null, endS: number, topRpm = 1800): Sweep[] {
  const d = new SweepDetector(topRpm, DEFAULT_TRANSIENT_SETTINGS);
  const out: Sweep[] = [];
  for (let k = 0; k * 0.1 <= endS + 1e-9; k++) {
    const s = d.step(k * 0.1, speed(k * 0.1));
    if (s) out.push(s);
  }
  const last = d.end();
  if (last) out.push(last);
  return out;
}

const ramp = (t: number, t0: number, t1: number, a: number, b: number): number => (t <= t0 ? a : t >= t1 ? b : a + ((b - a) * (t - t0)) / (t1 - t0));

describe('sweep detector', () => {
  it('reports a run-up that ends in a hold, from where the speed left its level to where it stopped', () => {
    const sweeps = run((t) => ramp(t, 10, 30, 600, 1500), 40);
    expect(sweeps).toHaveLength(1);
    const s = sweeps[0];
    expect(s.direction).toBe('up');
    expect(s.endedBy).toBe('steady');
    // Hysteresis is 0.5 % of 1800 rpm = 9 rpm: the start is within a few steps of 10 s.
    expect(Math.abs(s.startS - 10)).toBeLessThan(0.3);
    expect(Math.abs(s.endS - 30)).toBeLessThan(0.3);
    expect(Math.abs(s.toRpm - 1500)).toBeLessThan(10);
  });

  it('reports a run-up then a coast-down that reverses at its top', () => {
    const sweeps = run((t) => (t < 20 ? ramp(t, 5, 20, 600, 1500) : ramp(t, 20, 35, 1500, 600)), 45);
    expect(sweeps.map((s) => [s.direction, s.endedBy])).toEqual([
      ['up', 'reversed'],
      ['down', 'steady'],
    ]);
    expect(Math.abs(sweeps[1].startS - 20)).toBeLessThan(0.3);
  });

  it('reports a trip that loses the speed as a coast-down ended by speed lost', () => {
    const sweeps = run((t) => (t < 10 ? 1500 : t < 14 ? 1500 - 300 * (t - 10) : null), 20);
    expect(sweeps.map((s) => [s.direction, s.endedBy])).toEqual([['down', 'speed-lost']]);
    expect(sweeps[0].toRpm).toBeLessThan(400);
  });

  it('ignores process moves smaller than the minimum sweep and slow drifts', () => {
    // 100 rpm is 5.6 % of 1800 (less than 10 %); 600 rpm over 20 minutes is 0.03 %/s (less than 0.5 %/s).
    expect(run((t) => ramp(t, 5, 10, 1200, 1300), 20)).toEqual([]);
    expect(run((t) => ramp(t, 0, 1200, 900, 1500), 1200)).toEqual([]);
    // Ripple of a speed estimate (+-5 rpm) on a steady machine.
    expect(run((t) => 1200 + 5 * Math.sin(7 * t), 60)).toEqual([]);
  });
});

describe('triangle decimator', () => {
  it('passes DC exactly and a tone with its closed-form gain, stamped at the centre of its weights', () => {
    const fs = 10_000;
    const m = 10;
    const d = new TriangleDecimator(fs, m);
    const f = 50;
    const x = Float32Array.from({ length: 20_000 }, (_, n) => 1 + Math.cos(2 * Math.PI * f * (n / fs)));
    const out: Array<[number, number]> = [];
    d.push(x, 0, (t, v) => out.push([t, v]));
    // H(f) = (sin(pi f M / fs) / (M sin(pi f / fs)))^2: a triangle of 2M - 1 taps (closed form).
    const h = (Math.sin((Math.PI * f * m) / fs) / (m * Math.sin((Math.PI * f) / fs))) ** 2;
    expect(d.gainAt(f)).toBeCloseTo(h, 12);
    for (const [t, v] of out.slice(5)) expect(v).toBeCloseTo(1 + h * Math.cos(2 * Math.PI * f * t), 5);
    expect(d.outputRateHz).toBe(1000);
  });
});

describe('order demodulation', () => {
  it('reads the amplitude and phase lag of an order on a ramping shaft, whatever the ramp', () => {
    const fs = 2000;
    // Shaft from 10 to 20 Hz over 1 s: revolutions theta = 10 t + 5 t^2.
    const revs = Float64Array.from({ length: fs }, (_, n) => 10 * (n / fs) + 5 * (n / fs) ** 2);
    const x = Float64Array.from(revs, (th) => 0.7 * Math.cos(2 * Math.PI * 3 * th - 0.4) + 0.3 * Math.cos(2 * Math.PI * 1 * th));
    const [re, im] = demodulateOrder(x, revs, 0, fs, 3);
    expect(Math.hypot(re, im)).toBeCloseTo(0.7, 2);
    expect(-Math.atan2(im, re)).toBeCloseTo(0.4, 2);
  });
});

describe('sweep detector through a dropout', () => {
  it('does not split a run-up when the speed is lost for less than hold_s, and ends it after a longer loss', () => {
    // 1 s without speed in the middle of a 600 -> 1500 rpm ramp (hold_s is 2 s).
    const short = run((t) => (t > 15 && t < 16 ? null : ramp(t, 10, 30, 600, 1500)), 40);
    expect(short.map((s) => [s.direction, s.endedBy])).toEqual([['up', 'steady']]);
    expect(Math.abs(short[0].startS - 10)).toBeLessThan(0.3);
    // 5 s without speed: the sweep before it ends where the speed was last known.
    const long = run((t) => (t > 20 && t < 25 ? null : ramp(t, 10, 30, 600, 1500)), 40);
    expect(long[0].endedBy).toBe('speed-lost');
    expect(Math.abs(long[0].endS - 20)).toBeLessThan(0.2);
  });
});
