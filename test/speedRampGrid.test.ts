import { describe, expect, it } from 'vitest';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { TachlessTracker } from '../src/manipulation/tachlessTracker.ts';
import { SpeedTrack } from '../src/manipulation/speedTrack.ts';
import { chirpSignal, profileDurationS, speedHzAt, DEMO_PUMP_ORDERS, type SpeedProfileHz } from './support/chirp.ts';

// The engine's backend (pffft), whose transform the tracker's frames take in the product.
const FFT = await createRealFft(64);

// The tachless speed path on a grid of ramp rates x signal-to-noise ratios. Each signal is made
// here (test/support/chirp.ts): orders of a shaft angle that is the exact integral of a
// piecewise-linear speed profile, so the true speed at every instant is known in closed form,
// independent of qband's simulator and of the tracker.
//
// Range and levels of the demo pump (config/demo-map.yaml, config/demo-profile.yaml): range
// 450..1200 rpm, 2560 Hz, 1X 0.02 g, 2X 0.005 g, vane pass (5X) 0.01 g at 1100 rpm growing with
// speed squared, a constant 3.62X bearing tone 0.003 g, white noise 0.002 g. Added: a structural
// resonance at 14.2 Hz (Q 8) rung by broadband noise, a hump that does not follow speed.
const FS = 2560;
const RANGE_RPM: [number, number] = [450, 1200];
const TOP_HZ = 1200 / 60;
const LOW_HZ = 8; // 480 rpm
const HIGH_HZ = 19.5; // 1170 rpm
const ORDERS = DEMO_PUMP_ORDERS;
const DEMO_NOISE_G = 0.002;
const SNRS = [
  { name: 'demo', noiseG: DEMO_NOISE_G },
  { name: 'demo -10 dB', noiseG: DEMO_NOISE_G * 10 ** (10 / 20) },
  { name: 'demo -20 dB', noiseG: DEMO_NOISE_G * 10 ** (20 / 20) },
  // Noise 54 dB above the demo's: per 0.75 Hz line about 0.03 g, above every 1X of the range.
  { name: '1X buried', noiseG: DEMO_NOISE_G * 500 },
];
/** Ramp rates as a share of the range's top speed per second. */
const RATES = [0, 0.02, 0.05, 0.1, 0.15, 0.25];
const MIN_CONFIDENCE = 0.6; // the map's default min_confidence
const MAX_AGE_S = 2; // the map's default max_age_s

/** Holds 3 s at 480 rpm, ramps up to 1170 rpm, holds 2 s, ramps down, holds 3 s (rate 0: 12 s at 780 rpm). */
function profileFor(share: number): { profile: SpeedProfileHz; cornersS: number[] } {
  if (share === 0) return { profile: { startHz: 13, segments: [{ durS: 12, toHz: 13 }] }, cornersS: [] };
  const rampS = (HIGH_HZ - LOW_HZ) / (share * TOP_HZ);
  const segments = [
    { durS: 3, toHz: LOW_HZ },
    { durS: rampS, toHz: HIGH_HZ },
    { durS: 2, toHz: HIGH_HZ },
    { durS: rampS, toHz: LOW_HZ },
    { durS: 3, toHz: LOW_HZ },
  ];
  const cornersS: number[] = [];
  let t = 0;
  for (const s of segments.slice(0, -1)) cornersS.push((t += s.durS));
  return { profile: { startHz: LOW_HZ, segments }, cornersS };
}

interface Cell {
  okShare: number;
  medianPct: number;
  maxPct: number;
  maxNearEndsPct: number;
  /** The largest error within T/2 of a ramp end as time on the ramp: rpm error / ramp rate (s). */
  maxNearEndsS: number;
}

function run(share: number, noiseG: number): Cell {
  const { profile, cornersS } = profileFor(share);
  const x = chirpSignal({ profile, rateHz: FS, refHz: 1100 / 60, orders: ORDERS, noiseG, structural: { fnHz: 14.2, q: 8, levelG: 0.001 }, seed: 21 });
  const tr = new TachlessTracker({ inputRateHz: FS, rangeRpm: RANGE_RPM, minConfidence: MIN_CONFIDENCE, fft: FFT });
  const track = new SpeedTrack({ maxAgeS: MAX_AGE_S, minConfidence: MIN_CONFIDENCE });
  for (let i = 0; i < x.length; i += 256) {
    for (const p of tr.push(x.subarray(i, i + 256), i / FS)) if (p.rpm !== null) track.add(p);
  }
  // From when the first frame can have been estimated to the last time it covers.
  const nearEndS = tr.frameS / 2;
  const errs: number[] = [];
  let maxNearEnds = 0;
  let maxNearEndsRpm = 0;
  let ok = 0;
  let n = 0;
  for (let k = 0; ; k++) {
    const t = 2 + k * 0.1;
    if (t > profileDurationS(profile) - tr.lagS) break;
    n++;
    const s = track.at(t);
    if (s.reason !== 'ok' || s.rpm === null) continue;
    ok++;
    const truth = speedHzAt(profile, t) * 60;
    const e = (Math.abs(s.rpm - truth) / truth) * 100;
    if (cornersS.some((c) => Math.abs(t - c) < nearEndS)) {
      maxNearEnds = Math.max(maxNearEnds, e);
      maxNearEndsRpm = Math.max(maxNearEndsRpm, Math.abs(s.rpm - truth));
    } else errs.push(e);
  }
  errs.sort((a, b) => a - b);
  return {
    okShare: ok / n,
    medianPct: errs.length ? errs[errs.length >> 1] : Number.NaN,
    maxPct: errs.length ? errs[errs.length - 1] : 0,
    maxNearEndsPct: maxNearEnds,
    maxNearEndsS: share > 0 ? maxNearEndsRpm / (share * TOP_HZ * 60) : 0,
  };
}

describe('tachless speed on a grid of ramp rates and noise levels', () => {
  const rows: string[] = [];
  for (const snr of SNRS) {
    for (const share of RATES) {
      it(`${snr.name}, ramp ${share * 100} %/s of top speed`, () => {
        const c = run(share, snr.noiseG);
        rows.push(
          `| ${share * 100} | ${snr.name} | ${(c.okShare * 100).toFixed(0)} % | ${Number.isNaN(c.medianPct) ? '-' : c.medianPct.toFixed(3)} | ${c.maxPct.toFixed(2)} | ` +
            `${c.maxNearEndsPct.toFixed(2)} (${c.maxNearEndsS.toFixed(3)} s) |`,
        );
        if (snr.name === 'demo') {
          // Targets: ok throughout; within 1 % up to 10 %/s and 2 % up to 25 %/s on ramps and
          // holds. Within half a frame of a ramp's start or end the estimate is the frame's
          // average speed: its error, as time on the ramp, stays under 0.1 s.
          expect(c.okShare, 'share of time ok').toBeGreaterThanOrEqual(share <= 0.15 ? 0.98 : 0.93);
          expect(c.maxPct, 'largest error away from ramp ends, %').toBeLessThanOrEqual(share <= 0.1 ? 1 : 2);
          expect(c.medianPct, 'median error, %').toBeLessThanOrEqual(0.1);
          expect(c.maxNearEndsS, 'largest error near ramp ends, as time on the ramp (s)').toBeLessThanOrEqual(0.1);
        } else if (snr.name === 'demo -10 dB') {
          expect(c.okShare, 'share of time ok').toBeGreaterThanOrEqual(share <= 0.1 ? 0.9 : 0.75);
          expect(c.maxPct, 'largest error away from ramp ends, %').toBeLessThanOrEqual(2);
          expect(c.medianPct, 'median error, %').toBeLessThanOrEqual(0.2);
        } else if (snr.name === 'demo -20 dB') {
          // 1X near the bottom of the range is then about 13 dB over the noise in its line, 2X
          // and 5X hardly above it: the speed may be unknown for a good part of the time, but
          // what is given as ok stays right.
          expect(Math.max(c.maxPct, c.maxNearEndsPct), 'largest error when ok, %').toBeLessThanOrEqual(share <= 0.1 ? 3 : 12);
        } else {
          // 1X buried: the data cannot tell, so the speed must be mostly unknown, and never a
          // confident wrong answer (a harmonic, the structural hump, a noise line).
          expect(c.okShare, 'share of time ok').toBeLessThanOrEqual(0.1);
          expect(Math.max(c.maxPct, c.maxNearEndsPct), 'largest error when ok, %').toBeLessThanOrEqual(5);
        }
      });
    }
  }
  it('follows 1X, not a stronger 2X nor a strong structural hump, through a 10 %/s ramp', () => {
    // 2X three times the 1X, and the 14.2 Hz hump at 0.005 g: 1X passes it at 852 rpm and 2X at
    // 426 rpm; a tracker that locked onto either would be off by 50 % or more for seconds.
    const { profile } = profileFor(0.1);
    const x = chirpSignal({
      profile,
      rateHz: FS,
      refHz: 1100 / 60,
      orders: [
        { multiple: 1, peakG: 0.01, scaling: 'speed2' },
        { multiple: 2, peakG: 0.03, scaling: 'speed2' },
        { multiple: 3, peakG: 0.005, scaling: 'speed2' },
      ],
      noiseG: DEMO_NOISE_G,
      structural: { fnHz: 14.2, q: 8, levelG: 0.005 },
      seed: 23,
    });
    const tr = new TachlessTracker({ inputRateHz: FS, rangeRpm: RANGE_RPM, minConfidence: MIN_CONFIDENCE, fft: FFT });
    let ok = 0;
    let worstPct = 0;
    let n = 0;
    for (let i = 0; i < x.length; i += 256) {
      for (const p of tr.push(x.subarray(i, i + 256), i / FS)) {
        n++;
        if (p.rpm === null || p.confidence < MIN_CONFIDENCE) continue;
        ok++;
        const truth = speedHzAt(profile, p.tS) * 60;
        worstPct = Math.max(worstPct, (Math.abs(p.rpm - truth) / truth) * 100);
      }
    }
    console.log(`[lock] ${ok} of ${n} estimates trusted, worst ${worstPct.toFixed(2)} %`);
    // With 1X a third of 2X and the hump above 1X at the bottom of the range the estimator rightly
    // doubts much of the time; what it does trust must be 1X.
    expect(ok / n).toBeGreaterThan(0.4);
    expect(worstPct).toBeLessThan(3);
  });

  it('says unknown while the speed is below the range, and follows again when it comes back', () => {
    // 600 rpm, down at 60 rpm/s to 300 rpm (two thirds of the range's bottom), 6 s there, back
    // up to 600 rpm. Below the range 1X is outside the search and its
    // 2X, 3X... inside it form a family without its own fundamental: no trusted answer.
    const profile: SpeedProfileHz = {
      startHz: 10,
      segments: [
        { durS: 4, toHz: 10 },
        { durS: 5, toHz: 5 },
        { durS: 6, toHz: 5 },
        { durS: 5, toHz: 10 },
        { durS: 3, toHz: 10 },
      ],
    };
    const x = chirpSignal({ profile, rateHz: FS, refHz: 1100 / 60, orders: ORDERS, noiseG: DEMO_NOISE_G, seed: 3 });
    const tr = new TachlessTracker({ inputRateHz: FS, rangeRpm: RANGE_RPM, minConfidence: MIN_CONFIDENCE, fft: FFT });
    const wrong: string[] = [];
    let trustedInRange = 0;
    let inRange = 0;
    for (let i = 0; i < x.length; i += 256) {
      for (const p of tr.push(x.subarray(i, i + 256), i / FS)) {
        const truth = speedHzAt(profile, p.tS) * 60;
        const trusted = p.rpm !== null && p.confidence >= MIN_CONFIDENCE;
        // Well below the range (under 90 % of its bottom): nothing may be trusted.
        if (truth < 0.9 * RANGE_RPM[0] && trusted) wrong.push(`${p.tS.toFixed(1)} s: ${p.rpm?.toFixed(0)} rpm trusted at ${truth.toFixed(0)} rpm`);
        if (truth >= RANGE_RPM[0] && p.tS > 1.5) {
          inRange++;
          if (trusted && Math.abs((p.rpm as number) / truth - 1) <= 0.01) trustedInRange++;
        }
      }
    }
    expect(wrong).toEqual([]);
    expect(trustedInRange / inRange).toBeGreaterThan(0.95);
  });

  it('prints the table', () => {
    console.log(['| ramp, % of top speed per s | noise | time ok | median error % | max error % | max error % within T/2 of a ramp end (as time on the ramp) |', '| --- | --- | --- | --- | --- | --- |', ...rows].join('\n'));
  });
});
