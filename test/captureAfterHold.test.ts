/**
 * Transient capture releases its samples as soon as no window needs them (sensorCapture.ts):
 * a run-up that starts right after a long steady hold must still be recorded from its start.
 * The vibration is made here: a 1X sine of 0.05 g peak on the exact shaft angle (the closed-form
 * integral of a piecewise-linear speed), so each order point has a value worked out by hand:
 * velocity RMS = a / (2 pi f) / sqrt(2) of acceleration a = 0.05 x 9.80665 m/s^2 at
 * f = rpm / 60 (common practice: integration of a sine), and the speed the profile gives at the
 * point's time. A short hold is run beside the long one (300 s): both records must reach back to half a
 * window before the start the record reports, with a point every step from there.
 */
import { describe, expect, it } from 'vitest';
import { soakMap } from '../bench/soakMap.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { TransientCapture } from '../src/transients/transientCapture.ts';
import type { TransientRecord } from '../src/transients/transientRecord.ts';

const FS = 25_600;
const BLOCK = 2560;
const G = 9.80665;
const PEAK_G = 0.05;

// The soak's asset (bench/soakMap.ts), one sensor.
const MAP = soakMap('t', 'mqtt://127.0.0.1:1883', 1);

/** Holds 900 rpm for holdS, runs up at 40 rpm/s to 1700 rpm, holds 20 s. */
function profile(holdS: number): { rpm: (t: number) => number; revs: (t: number) => number; startS: number } {
  const rampS = 20;
  const rpm = (t: number): number => (t < holdS ? 900 : t < holdS + rampS ? 900 + 40 * (t - holdS) : 1700);
  const revs = (t: number): number => {
    if (t < holdS) return (900 / 60) * t;
    const r0 = (900 / 60) * holdS;
    if (t < holdS + rampS) return r0 + (900 * (t - holdS) + 20 * (t - holdS) ** 2) / 60;
    return r0 + (900 * rampS + 20 * rampS * rampS) / 60 + (1700 / 60) * (t - holdS - rampS);
  };
  return { rpm, revs, startS: holdS };
}

function record(holdS: number): { rec: TransientRecord; startS: number; rpm: (t: number) => number } {
  const { map, problems } = parseAssetMap(MAP, 'test map');
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  const c = new TransientCapture(map.assets[0]);
  const p = profile(holdS);
  const x = new Float32Array(BLOCK);
  const recs: TransientRecord[] = [];
  const endS = holdS + 40;
  for (let b = 0; b * 0.1 < endS; b++) {
    const t0 = b * 0.1;
    for (let i = 0; i < BLOCK; i++) x[i] = PEAK_G * Math.sin(2 * Math.PI * p.revs(t0 + i / FS));
    c.pushSamples(0, t0, FS, x);
    recs.push(...c.step(t0 + 0.1, p.rpm(t0 + 0.1), (t) => p.rpm(t), 'topic'));
  }
  recs.push(...c.finish());
  expect(recs.length, `hold ${holdS} s: one run-up recorded`).toBe(1);
  return { rec: recs[0], startS: p.startS, rpm: p.rpm };
}

describe('transient capture after a long steady hold', () => {
  it('records a run-up from its start, each 1X point at the speed and velocity worked out by hand', () => {
    const runs = [5, 300].map((holdS) => ({ holdS, ...record(holdS) }));
    for (const { holdS, rec, startS, rpm } of runs) {
      const track = rec.orders.find((o) => o.order === '1x' && o.sensor === 's0');
      expect(track, `hold ${holdS} s: a 1X track`).toBeDefined();
      const points = (track as NonNullable<typeof track>).points;
      // The detector may place the start a little after the true corner; the points must reach
      // back to half a window before the start it reports, with no gap after.
      expect(rec.t_start_s).toBeGreaterThanOrEqual(startS - rec.window_s);
      expect(points[0][0], `hold ${holdS} s: first point`).toBeLessThanOrEqual(rec.t_start_s - rec.window_s / 2 + rec.step_s + 1e-9);
      for (let i = 1; i < points.length; i++) expect(points[i][0] - points[i - 1][0], `hold ${holdS} s: spacing at ${points[i][0]}`).toBeCloseTo(rec.step_s, 6);
      expect(points[points.length - 1][0]).toBeGreaterThanOrEqual(rec.t_end_s);
      for (const [tS, speedRpm, velocity] of points) {
        const trueRpm = rpm(tS);
        expect(Math.abs(speedRpm / trueRpm - 1), `hold ${holdS} s: speed at ${tS}`).toBeLessThan(0.01);
        const expected = ((PEAK_G * G) / (2 * Math.PI * (trueRpm / 60)) / Math.SQRT2) * 1000;
        expect(Math.abs(velocity / expected - 1), `hold ${holdS} s: velocity at ${tS}`).toBeLessThan(0.03);
      }
      if (process.env.QV) console.log(holdS, rec.t_start_s, rec.t_end_s, points[0], points.length);
    }
  });
});
