import { describe, expect, it } from 'vitest';
import type { SpeedPoint } from '../src/manipulation/speedPoint.ts';
import { SpeedTrack } from '../src/manipulation/speedTrack.ts';

const p = (tS: number, rpm: number, confidence = 1, source: SpeedPoint['source'] = 'tach'): SpeedPoint => ({
  tS,
  rpm,
  confidence,
  source,
});

// Expected values are hand interpolations: rpm(t) = r0 + (r1 - r0) (t - t0) / (t1 - t0).
describe('SpeedTrack', () => {
  it('no points: no-data', () => {
    const tr = new SpeedTrack({ maxAgeS: 2, minConfidence: 0.5 });
    expect(tr.at(0)).toEqual({ rpm: null, confidence: 0, ageS: null, source: null, reason: 'no-data' });
    expect(tr.latestS()).toBeNull();
  });

  it('interpolates linearly between bracketing points within maxAgeS', () => {
    const tr = new SpeedTrack({ maxAgeS: 2, minConfidence: 0.5 });
    tr.add(p(10, 1200));
    tr.add(p(11, 1500));
    // t = 10.25: 1200 + 300 x 0.25 = 1275 rpm (hand); 1e-9 for float rounding.
    const a = tr.at(10.25);
    expect(a.reason).toBe('ok');
    expect(a.rpm as number).toBeCloseTo(1275, 9);
    expect(a.ageS as number).toBeCloseTo(0.25, 12);
    expect(tr.at(10).rpm).toBe(1200);
    expect(tr.at(11).rpm).toBe(1500);
  });

  it('holds the earlier point up to maxAgeS, then stale', () => {
    const tr = new SpeedTrack({ maxAgeS: 2, minConfidence: 0.5 });
    tr.add(p(10, 1200, 0.9, 'spectrum'));
    expect(tr.at(12)).toEqual({ rpm: 1200, confidence: 0.9, ageS: 2, source: 'spectrum', reason: 'ok' }); // exactly maxAgeS
    const s = tr.at(12.001);
    expect(s.rpm).toBeNull();
    expect(s.reason).toBe('stale');
    expect(s.ageS as number).toBeCloseTo(2.001, 12);
  });

  it('holds instead of interpolating when the later point is beyond maxAgeS', () => {
    const tr = new SpeedTrack({ maxAgeS: 2, minConfidence: 0.5 });
    tr.add(p(10, 1200));
    tr.add(p(13, 1800));
    expect(tr.at(10.5).rpm).toBe(1200); // next is 2.5 s ahead: held, not interpolated
    expect(tr.at(11.5).rpm).toBeCloseTo(1200 + 600 * (1.5 / 3), 9); // both within 2 s: 1500 rpm
    expect(tr.at(12.5).rpm).toBeNull(); // earlier point 2.5 s old: stale even though next is near
    expect(tr.at(12.5).reason).toBe('stale');
  });

  it('before the first point: no-data, never extrapolated backwards', () => {
    const tr = new SpeedTrack({ maxAgeS: 2, minConfidence: 0.5 });
    tr.add(p(10, 1200));
    expect(tr.at(9.9).reason).toBe('no-data');
    expect(tr.at(9.9).rpm).toBeNull();
  });

  it('out-of-order points are kept sorted', () => {
    const tr = new SpeedTrack({ maxAgeS: 5, minConfidence: 0.5 });
    tr.add(p(3, 1300));
    tr.add(p(1, 1100));
    tr.add(p(2, 1200));
    tr.add(p(0, 1000));
    expect(tr.latestS()).toBe(3);
    expect(tr.at(0.5).rpm).toBeCloseTo(1050, 9);
    expect(tr.at(1.5).rpm).toBeCloseTo(1150, 9);
    expect(tr.at(2.5).rpm).toBeCloseTo(1250, 9);
  });

  it('a point at an existing time replaces it', () => {
    const tr = new SpeedTrack({ maxAgeS: 5, minConfidence: 0.5 });
    tr.add(p(1, 1100));
    tr.add(p(1, 1111));
    expect(tr.size).toBe(1);
    expect(tr.at(1).rpm).toBe(1111);
  });

  it('low confidence gives rpm null, and a low-confidence later point is not interpolated toward', () => {
    const tr = new SpeedTrack({ maxAgeS: 5, minConfidence: 0.6 });
    tr.add(p(1, 1500, 0.59, 'spectrum'));
    const a = tr.at(1.5);
    expect(a).toEqual({ rpm: null, confidence: 0.59, ageS: 0.5, source: 'spectrum', reason: 'low-confidence' });
    tr.add(p(0, 1000, 0.9, 'spectrum'));
    // At 0.5 the earlier point is trusted, the later one is not: hold 1000, do not move toward 1500.
    expect(tr.at(0.5).rpm).toBe(1000);
    // Exactly at minConfidence counts as trusted.
    tr.add(p(2, 1600, 0.6, 'spectrum'));
    expect(tr.at(2).rpm).toBe(1600);
  });

  it('interpolated answers carry the lower confidence and the nearer source', () => {
    const tr = new SpeedTrack({ maxAgeS: 5, minConfidence: 0.5 });
    tr.add(p(0, 1000, 0.9, 'spectrum'));
    tr.add(p(1, 1100, 1, 'series'));
    expect(tr.at(0.25)).toMatchObject({ confidence: 0.9, source: 'spectrum' });
    expect(tr.at(0.75)).toMatchObject({ confidence: 0.9, source: 'series' });
  });

  it('bounded capacity drops the oldest points', () => {
    const tr = new SpeedTrack({ maxAgeS: 100, minConfidence: 0.5, capacity: 3 });
    for (let i = 0; i < 5; i++) tr.add(p(i, 1000 + i));
    expect(tr.size).toBe(3);
    expect(tr.at(1.5).reason).toBe('no-data'); // points 0 and 1 are gone
    expect(tr.at(2).rpm).toBe(1002);
    tr.add(p(0.5, 999)); // older than everything kept while full: ignored
    expect(tr.size).toBe(3);
    expect(tr.at(0.5).reason).toBe('no-data');
  });

  it('refuses NaN, negative rpm and confidence outside 0..1, counting them', () => {
    const tr = new SpeedTrack({ maxAgeS: 5, minConfidence: 0.5 });
    tr.add(p(Number.NaN, 1000));
    tr.add(p(1, Number.NaN));
    tr.add(p(1, -5));
    tr.add(p(1, 1000, 1.5));
    expect(tr.size).toBe(0);
    expect(tr.dropped).toBe(4);
    expect(tr.at(Number.NaN).reason).toBe('no-data');
  });

  it('reset() empties the track', () => {
    const tr = new SpeedTrack({ maxAgeS: 5, minConfidence: 0.5 });
    tr.add(p(1, 1000));
    tr.reset();
    expect(tr.latestS()).toBeNull();
    expect(tr.at(1).reason).toBe('no-data');
  });

  it('refuses bad options', () => {
    expect(() => new SpeedTrack({ maxAgeS: -1, minConfidence: 0.5 })).toThrow(/maxAgeS/);
    expect(() => new SpeedTrack({ maxAgeS: 1, minConfidence: 2 })).toThrow(/minConfidence/);
    expect(() => new SpeedTrack({ maxAgeS: 1, minConfidence: 0.5, capacity: 1 })).toThrow(/capacity/);
  });
});
