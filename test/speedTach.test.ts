import { describe, expect, it } from 'vitest';
import { TachSpeed } from '../src/manipulation/speedFromTach.ts';
import type { SpeedPoint } from '../src/manipulation/speedPoint.ts';

/**
 * Synthetic tach signals with a known shaft angle.
 *
 * Shaft angle in revolutions for a linear ramp rpm(t) = r0 + a t:
 *   theta(t) = (r0 t + a t^2 / 2) / 60
 * A mark sits at theta * ppr = n + offset (offset lets marks be unevenly spaced per rev).
 * The pulse rises linearly over `rise` of a mark spacing, so its mid level (0.5) is crossed at
 * theta * ppr = n + rise / 2; the expected edge time solves
 *   a/2 t^2 + r0 t - 60 (n + rise/2) / ppr = 0  =>  t = (-r0 + sqrt(r0^2 + 2 a 60 (n + rise/2) / ppr)) / a.
 * Over one revolution of a linear ramp the mean speed 60 / T_rev equals the speed at the
 * revolution's mid time (mean of a linear function), a second, independent hand check.
 */
interface Ramp {
  r0Rpm: number;
  aRpmPerS: number;
}

function thetaRev(r: Ramp, tS: number): number {
  return (r.r0Rpm * tS + (r.aRpmPerS * tS * tS) / 2) / 60;
}

function edgeTimeS(r: Ramp, revs: number): number {
  if (r.aRpmPerS === 0) return (60 * revs) / r.r0Rpm;
  return (-r.r0Rpm + Math.sqrt(r.r0Rpm * r.r0Rpm + 2 * r.aRpmPerS * 60 * revs)) / r.aRpmPerS;
}

/** Deterministic uniform noise in [-1, 1) (mulberry32), so a failure can be replayed. */
function noiseSource(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s + 0x6d2b79f5) >>> 0;
    let t = s;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return (((t ^ (t >>> 14)) >>> 0) / 4294967296) * 2 - 1;
  };
}

interface PulseShape {
  ppr: number;
  /** Fraction of a mark spacing spent rising (and falling). */
  rise: number;
  /** Fraction of a mark spacing the pulse stays high (including the rise). */
  duty: number;
}

/** Unit pulse train 0..1 following the ramp; `value` maps the unit level to the channel. */
function pulseTrain(
  r: Ramp,
  shape: PulseShape,
  fsHz: number,
  durationS: number,
  value: (u: number, i: number) => number = (u) => u,
): Float32Array {
  const n = Math.round(durationS * fsHz);
  const out = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const p = thetaRev(r, i / fsHz) * shape.ppr;
    const f = p - Math.floor(p);
    let u: number;
    if (f < shape.rise) u = f / shape.rise;
    else if (f < shape.duty) u = 1;
    else if (f < shape.duty + shape.rise) u = 1 - (f - shape.duty) / shape.rise;
    else u = 0;
    out[i] = value(u, i);
  }
  return out;
}

/** Expected (time, rpm) of the revolution ending at each mark-completing edge after the first. */
function expectedRevs(r: Ramp, ppr: number, rise: number, untilS: number): { tS: number; rpm: number }[] {
  const out: { tS: number; rpm: number }[] = [];
  for (let rev = 1; ; rev++) {
    // Marks at theta*ppr = k + rise/2; revolutions complete every ppr marks.
    const tStart = edgeTimeS(r, (ppr * (rev - 1) + rise / 2) / ppr);
    const tEnd = edgeTimeS(r, (ppr * rev + rise / 2) / ppr);
    if (tEnd > untilS) return out;
    out.push({ tS: tEnd, rpm: 60 / (tEnd - tStart) });
  }
}

/**
 * How many points the tach must report: revolutions that start on an edge after the warm-up
 * (one revolution at 0.5 x min rpm), less the last one, which waits for the next edge to
 * confirm it.
 */
function reportable(want: { tS: number; rpm: number }[], minRpm: number): number {
  const warmupS = 60 / (0.5 * minRpm);
  return want.filter((w) => w.tS - 60 / w.rpm >= warmupS).length - 1;
}

function expectMatches(
  got: SpeedPoint[],
  want: { tS: number; rpm: number }[],
  relTol: number,
  timeTolS: number,
  label: string,
): number {
  let matched = 0;
  // Each expected revolution must appear once (the tach may skip revolutions in warm-up only).
  let j = 0;
  for (const w of want) {
    while (j < got.length && got[j].tS < w.tS - timeTolS) j++;
    if (j >= got.length) break;
    const g = got[j];
    if (Math.abs(g.tS - w.tS) > timeTolS) continue; // this revolution was not reported
    const rel = Math.abs(g.rpm - w.rpm) / w.rpm;
    expect(
      rel,
      `${label}: at t=${w.tS.toFixed(5)} s expected ${w.rpm.toFixed(4)} rpm, got ${g.rpm.toFixed(4)} rpm ` +
        `(edge at ${g.tS.toFixed(6)} s), tolerance ${(relTol * 100).toFixed(3)} %`,
    ).toBeLessThanOrEqual(relTol);
    matched++;
    j++;
  }
  return matched;
}

const FS_HZ = 10_000;

describe('TachSpeed', () => {
  it('first revolutions of a 600 -> 1200 rpm/s ramp match the hand calculation', () => {
    // Hand calculation (rise -> 0): theta = 10 t + 5 t^2 rev; edge n at 5t^2 + 10t - n = 0.
    // Warm-up is one revolution at 0.5 x 600 rpm = 0.2 s, so the edges at n = 1, 2 (0.0954 s,
    // 0.1832 s) only train the envelope; the first revolution timed is n = 3 -> 4:
    //   t3 = (-10 + sqrt(160)) / 10 = 0.264911 s, t4 = (-10 + sqrt(180)) / 10 = 0.341641 s
    //   rpm = 60 / (t4 - t3) = 60 / 0.076730 = 781.97 rpm = 600 + 600 * (t3 + t4) / 2
    // Rise 0.001 of a revolution moves both edges by about 0.1 ms, the period by well under 1 us.
    const ramp = { r0Rpm: 600, aRpmPerS: 600 };
    const x = pulseTrain(ramp, { ppr: 1, rise: 0.001, duty: 0.5 }, FS_HZ, 1.0);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [600, 1200] });
    const pts = tach.push(x, 0);
    const t3 = (-10 + Math.sqrt(160)) / 10;
    const t4 = (-10 + Math.sqrt(180)) / 10;
    const handRpm = 60 / (t4 - t3);
    expect(handRpm).toBeCloseTo(781.97, 2);
    expect(handRpm).toBeCloseTo(600 + 600 * ((t3 + t4) / 2), 6); // mean of a linear ramp
    expect(pts[0].tS, 'first point is the revolution ending at edge 4').toBeCloseTo(t4, 3);
    // Tolerance 0.05 %: one sample of timing error over a 0.077 s revolution would be 0.13 %;
    // interpolation on a 10-sample rise is good to a few hundredths of a sample.
    expect(expectMatches(pts, [{ tS: t4, rpm: handRpm }], 5e-4, 2e-4, 'hand rev 3->4')).toBe(1);
    expect(pts.every((p) => p.confidence === 1 && p.source === 'tach')).toBe(true);
  });

  it('follows a 600 -> 1200 rpm ramp, square wave, one mark per rev', () => {
    const ramp = { r0Rpm: 600, aRpmPerS: 300 };
    const shape = { ppr: 1, rise: 0.01, duty: 0.5 };
    const x = pulseTrain(ramp, shape, FS_HZ, 2.0);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [500, 1500] });
    const pts = tach.push(x, 0);
    const want = expectedRevs(ramp, 1, shape.rise, 2.0);
    expect(pts.length).toBe(reportable(want, 500));
    // 0.05 %: see the hand-calculation test; the envelope relaxes by < 4 % of the span between
    // refreshes, which moves the mid level and both edges of a revolution almost equally.
    expect(expectMatches(pts, want, 5e-4, 2e-4, 'ramp')).toBe(pts.length);
    expect(tach.rejected).toBe(0);
  });

  it('one sample at a time, arbitrary splits and one big block give the same points', () => {
    const ramp = { r0Rpm: 900, aRpmPerS: -200 };
    const x = pulseTrain(ramp, { ppr: 1, rise: 0.02, duty: 0.3 }, FS_HZ, 1.5);
    const opts = { sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [500, 1200] as [number, number] };
    const t0S = 12.345;
    const whole = new TachSpeed(opts).push(x, t0S);

    const single = new TachSpeed(opts);
    const singlePts: SpeedPoint[] = [];
    for (let i = 0; i < x.length; i++) singlePts.push(...single.push(x.subarray(i, i + 1), t0S + i / FS_HZ));

    const rnd = noiseSource(7);
    const split = new TachSpeed(opts);
    const splitPts: SpeedPoint[] = [];
    for (let i = 0; i < x.length; ) {
      const n = 1 + Math.floor((rnd() + 1) * 700);
      splitPts.push(...split.push(x.subarray(i, i + n), t0S + i / FS_HZ));
      i += n;
    }
    expect(whole.length).toBeGreaterThan(10);
    expect(singlePts).toEqual(whole);
    expect(splitPts).toEqual(whole);
  });

  it('ignores DC offset and gain and tolerates noise', () => {
    const ramp = { r0Rpm: 1500, aRpmPerS: 500 };
    const shape = { ppr: 1, rise: 0.02, duty: 0.5 };
    const rnd = noiseSource(42);
    // 24 V-like logic level scaled to 0.05 units on a 3.7 offset, noise 5 % of the swing (peak).
    const x = pulseTrain(ramp, shape, FS_HZ, 2.0, (u) => 3.7 + 0.05 * u + 0.0025 * rnd());
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [1000, 3000] });
    const pts = tach.push(x, 0);
    const want = expectedRevs(ramp, 1, shape.rise, 2.0);
    expect(pts.length).toBe(reportable(want, 1000));
    // Noise of 5 % of the swing on an edge 8 samples long jitters each edge by up to about
    // 0.1 sample/0.5 = 0.4 sample (bounded by the noise peak over the slope); over a revolution
    // of >= 200 samples that is 0.2 % per edge pair, tolerance 0.4 %.
    expect(expectMatches(pts, want, 4e-3, 5e-4, 'offset+noise')).toBe(pts.length);
    expect(tach.rejected).toBe(0);
  });

  it('two unequally spaced marks per rev give one point per revolution', () => {
    // Marks at 0 and 0.35 rev: built as two trains with ppr 1, the second offset by 0.35 rev.
    const ramp = { r0Rpm: 1200, aRpmPerS: 400 };
    const fs = FS_HZ;
    const durationS = 1.5;
    const a = pulseTrain(ramp, { ppr: 1, rise: 0.005, duty: 0.05 }, fs, durationS);
    const n = a.length;
    const x = new Float32Array(n);
    for (let i = 0; i < n; i++) {
      const f = thetaRev(ramp, i / fs) - 0.35;
      const fr = f - Math.floor(f);
      const b = fr < 0.005 ? fr / 0.005 : fr < 0.05 ? 1 : fr < 0.055 ? 1 - (fr - 0.05) / 0.005 : 0;
      x[i] = Math.max(a[i], b);
    }
    const tach = new TachSpeed({ sampleRateHz: fs, pulsesPerRev: 2, rangeRpm: [1000, 2000] });
    const pts = tach.push(x, 0);
    // Revolutions are timed mark to same mark, so whichever mark the count starts on, each
    // point is a full revolution: compare with the ramp's mean speed over [t - T, t].
    for (let i = 1; i < pts.length; i++) {
      const revs = thetaRev(ramp, pts[i].tS) - thetaRev(ramp, pts[i - 1].tS);
      expect(
        Math.abs(revs - 1),
        `consecutive points ${pts[i - 1].tS.toFixed(5)} .. ${pts[i].tS.toFixed(5)} s span ${revs} rev, expected 1 (tolerance 1e-3 rev)`,
      ).toBeLessThan(1e-3);
      const want = 60 / (pts[i].tS - pts[i - 1].tS);
      expect(Math.abs(pts[i].rpm - want) / want).toBeLessThan(1e-9);
    }
    // Speed check against the ramp: mean speed over the revolution = speed at mid time.
    for (const p of pts) {
      const tStart = p.tS - 60 / p.rpm;
      const want = ramp.r0Rpm + ramp.aRpmPerS * ((tStart + p.tS) / 2);
      expect(Math.abs(p.rpm - want) / want, `rpm at ${p.tS}: want ${want}, got ${p.rpm}, tol 0.05 %`).toBeLessThan(5e-4);
    }
    const revsCovered = thetaRev(ramp, durationS) - thetaRev(ramp, 0.12);
    expect(pts.length).toBeGreaterThanOrEqual(Math.floor(revsCovered) - 2);
    expect(pts.length).toBeLessThanOrEqual(Math.ceil(revsCovered));
  });

  it('narrow pulses two samples wide', () => {
    // 1800 rpm at 10 kHz: 333.3 samples per rev, a 2-sample pulse, rise of 0.3 sample.
    const ramp = { r0Rpm: 1800, aRpmPerS: 0 };
    const x = pulseTrain(ramp, { ppr: 1, rise: 0.001, duty: 0.006 }, FS_HZ, 1.0);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [1000, 3000] });
    const pts = tach.push(x, 0);
    expect(pts.length).toBeGreaterThan(20);
    // A near-vertical edge is located to within about one sample; one sample in 333 is 0.3 %.
    for (const p of pts) {
      expect(Math.abs(p.rpm - 1800) / 1800, `rpm ${p.rpm} vs 1800, tol 0.3 %`).toBeLessThanOrEqual(3.1e-3);
    }
    // Averaged over many revolutions the sub-sample timing brings the mean much closer.
    const mean = pts.reduce((s, p) => s + p.rpm, 0) / pts.length;
    expect(Math.abs(mean - 1800) / 1800, `mean ${mean} vs 1800, tol 0.02 %`).toBeLessThan(2e-4);
  });

  it('once-per-rev notch of negative polarity (signal high, short dip)', () => {
    const ramp = { r0Rpm: 2400, aRpmPerS: -600 };
    const shape = { ppr: 1, rise: 0.01, duty: 0.93 };
    // u is high 93 % of the rev: that is a 5 % notch; scale to a -8 V probe gap signal.
    const x = pulseTrain(ramp, shape, FS_HZ, 1.5, (u) => -8 + 2 * u);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [1200, 3000] });
    const pts = tach.push(x, 0);
    // The rising edge here is the notch's trailing side at theta = n + rise/2 as before.
    const want = expectedRevs(ramp, 1, shape.rise, 1.5);
    expect(pts.length).toBe(reportable(want, 1200));
    expect(expectMatches(pts, want, 5e-4, 2e-4, 'notch')).toBe(pts.length);
  });

  for (const phase of [0.3, 0.6, 0.85, 0.95]) {
    it(`drops a glitch pulse at ${phase} of a revolution and reports no wrong speed`, () => {
      const ramp = { r0Rpm: 1200, aRpmPerS: 0 };
      const x = pulseTrain(ramp, { ppr: 1, rise: 0.01, duty: 0.1 }, FS_HZ, 1.0);
      // A 3-sample spike in revolution 6 (1200 rpm: 500 samples per rev, high for the first 50).
      const at = 6 * 500 + Math.round(phase * 500);
      x[at] = x[at + 1] = x[at + 2] = 1;
      const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [1000, 1500] });
      const pts = tach.push(x, 0);
      expect(tach.rejected).toBeGreaterThanOrEqual(1);
      // 0.05 %: as for the clean ramp; any point built on the glitch would be off by >= 5 %.
      for (const p of pts) expect(Math.abs(p.rpm - 1200) / 1200, `rpm ${p.rpm} at ${p.tS}`).toBeLessThan(5e-4);
      // 20 revolutions in 1 s, 2 in warm-up, 1 waiting at the end, and at most 4 lost around
      // the glitch (the doubtful revolution, and the restart needing a full revolution).
      expect(pts.length).toBeGreaterThanOrEqual(13);
    });
  }

  it('a lost pulse restarts the count instead of reporting half speed', () => {
    const ramp = { r0Rpm: 1200, aRpmPerS: 0 };
    const x = pulseTrain(ramp, { ppr: 1, rise: 0.01, duty: 0.5 }, FS_HZ, 1.0);
    // Remove the pulse of revolution 7 (samples 3500..3750 high).
    x.fill(0, 7 * 500, 7 * 500 + 260);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [1000, 1500] });
    const pts = tach.push(x, 0);
    // 600 rpm is inside 0.5 x min .. 2 x max, so the interval test is what must catch it.
    expect(tach.rejected).toBe(1);
    for (const p of pts) expect(Math.abs(p.rpm - 1200) / 1200, `rpm ${p.rpm} at ${p.tS}`).toBeLessThan(5e-4);
    expect(pts.length).toBeGreaterThan(10);
  });

  it('rejects speeds outside 0.5 x min .. 2 x max of the range', () => {
    const x = pulseTrain({ r0Rpm: 3000, aRpmPerS: 0 }, { ppr: 1, rise: 0.01, duty: 0.5 }, FS_HZ, 1.0);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [600, 1200] });
    expect(tach.push(x, 0)).toEqual([]);
    expect(tach.rejected).toBeGreaterThan(10);
  });

  it('empty block, one sample and NaN samples', () => {
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [600, 1200] });
    expect(tach.push(new Float32Array(0), 0)).toEqual([]);
    expect(tach.push(new Float32Array([0.5]), 0)).toEqual([]);
    const x = pulseTrain({ r0Rpm: 900, aRpmPerS: 0 }, { ppr: 1, rise: 0.01, duty: 0.5 }, FS_HZ, 1.0);
    x[5000] = Number.NaN; // inside a low phase (900 rpm: 666.7 samples per rev; 5000 -> 0.5 rev)
    const pts = tach.push(x.subarray(1), 1 / FS_HZ);
    expect(pts.length).toBeGreaterThan(5);
    for (const p of pts) expect(Math.abs(p.rpm - 900) / 900, `rpm ${p.rpm} at ${p.tS}`).toBeLessThan(5e-4);
  });

  it('a gap between blocks breaks the revolution count', () => {
    const ramp = { r0Rpm: 1200, aRpmPerS: 0 };
    const x = pulseTrain(ramp, { ppr: 1, rise: 0.01, duty: 0.5 }, FS_HZ, 1.0);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [1000, 1500] });
    const before = tach.push(x.subarray(0, 5000), 0);
    // The next block claims to start 0.13 s later than the data continues: no period may span it.
    const after = tach.push(x.subarray(5000), 0.5 + 0.13);
    expect(before.length).toBeGreaterThan(3);
    expect(after.length).toBeGreaterThan(3);
    for (const p of [...before, ...after]) expect(Math.abs(p.rpm - 1200) / 1200, `rpm ${p.rpm} at ${p.tS}`).toBeLessThan(5e-4);
    expect(after[0].tS).toBeGreaterThan(0.63);
  });

  it('reset() forgets state and the reject count', () => {
    const x = pulseTrain({ r0Rpm: 3000, aRpmPerS: 0 }, { ppr: 1, rise: 0.01, duty: 0.5 }, FS_HZ, 0.5);
    const tach = new TachSpeed({ sampleRateHz: FS_HZ, pulsesPerRev: 1, rangeRpm: [600, 1200] });
    tach.push(x, 0);
    expect(tach.rejected).toBeGreaterThan(0);
    tach.reset();
    expect(tach.rejected).toBe(0);
    const y = pulseTrain({ r0Rpm: 900, aRpmPerS: 0 }, { ppr: 1, rise: 0.01, duty: 0.5 }, FS_HZ, 1.0);
    const pts = tach.push(y, 100);
    expect(pts.length).toBeGreaterThan(5);
    expect(pts[0].tS).toBeGreaterThan(100);
  });

  it('refuses bad options', () => {
    expect(() => new TachSpeed({ sampleRateHz: 0, pulsesPerRev: 1, rangeRpm: [1, 2] })).toThrow(/sampleRateHz/);
    expect(() => new TachSpeed({ sampleRateHz: 1, pulsesPerRev: 1.5, rangeRpm: [1, 2] })).toThrow(/pulsesPerRev/);
    expect(() => new TachSpeed({ sampleRateHz: 1, pulsesPerRev: 1, rangeRpm: [2, 1] })).toThrow(/rangeRpm/);
  });
});
