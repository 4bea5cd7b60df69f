import { describe, expect, it } from 'vitest';
import { asset, component, fitSine, profile, run, within } from './support/simulationFixtures.ts';
import { QbandError } from '../src/errors.ts';
import { SeededRandom } from '../src/simulation/prng.ts';
import { revolutionsAt, rpmAt, speedSchedule } from '../src/simulation/speedSchedule.ts';

// The simulator's synthesis: the speed schedule, the channels it writes (tach, orders through the
// components' resonators, noise) and its seeded random numbers.

describe('speed schedule', () => {
  const p = profile({ startRpm: 600, segments: [{ kind: 'hold', durationS: 2.05 }, { kind: 'ramp', toRpm: 1200, durationS: 3 }, { kind: 'hold', durationS: 1 }] });
  // Hand computation: 600 rpm x 2.05 s = 20.5 rev; ramp 600 -> 1200 over 3 s = 900/60 x 3 = 45 rev;
  // 1200 rpm x 1 s = 20 rev; total 85.5 rev in 6.05 s.
  const s = speedSchedule(p);
  it('integrates revolutions exactly (trapezoid of a straight line)', () => {
    within('revolutions at end', revolutionsAt(s, 6.05), 85.5, 1e-9, 'hand computation');
    within('revolutions mid-ramp', revolutionsAt(s, 3.55), 20.5 + 1.5 * (600 + 900) / 2 / 60, 1e-9, 'hand computation');
    within('rpm mid-ramp', rpmAt(s, 3.55), 900, 1e-9, 'linear interpolation');
  });
  it('exactly on a breakpoint gives the breakpoint speed', () => {
    expect(rpmAt(s, 5.05)).toBe(1200);
    expect(rpmAt(s, 2.05)).toBe(600);
  });
});

describe('synthesize', () => {
  it('tach pulses count equals the revolutions integrated from the profile', () => {
    // 3 pulses per revolution over the 85.5-revolution profile above (hand computation): the last
    // sample is at 6.05 - 1/fs s, 20/2560 rev before the end, so floor(3 x 85.49) = 256 pulses.
    const a = asset({ speed: { source: 'tach', channel: 1, pulsesPerRev: 3, rangeRpm: [300, 1800], minConfidence: 0.6, maxAgeS: 2 } });
    const p = profile({ startRpm: 600, segments: [{ kind: 'hold', durationS: 2.05 }, { kind: 'ramp', toRpm: 1200, durationS: 3 }, { kind: 'hold', durationS: 1 }] });
    const [, tach] = run(a, p, 1000);
    let rising = 0;
    for (let n = 1; n < tach.length; n++) if (tach[n] > 2.5 && tach[n - 1] <= 2.5) rising++;
    expect(Math.max(...tach)).toBe(5);
    expect(rising).toBe(256);
  });

  it('gives the same samples whatever the block size (state carries across blocks)', () => {
    const a = asset({ components: [component('panel', 15, 0.05, ['1x'])] });
    const p = profile({ segments: [{ kind: 'ramp', toRpm: 1200, durationS: 3 }], noiseG: 0.001 });
    expect(run(a, p, 333)).toEqual(run(a, p, 4096));
  });

  it('seeded noise is reproducible, differs with the seed, and has the RMS asked for', () => {
    const a = asset();
    const p = profile({ forcing: [], noiseG: 0.002, segments: [{ kind: 'hold', durationS: 10 }] });
    const [x1] = run(a, p);
    const [x2] = run(a, p);
    const [x3] = run(a, { ...p, seed: 8 });
    expect(x1).toEqual(x2);
    expect(x1).not.toEqual(x3);
    const rms = Math.sqrt(x1.reduce((s, v) => s + v * v, 0) / x1.length);
    // 25600 Gaussian samples: the RMS estimate has relative standard deviation 1/sqrt(2N) = 0.44 %
    // (common practice); tolerance 2 % (4.5 standard deviations).
    within('noise RMS (g)', rms, 0.002, 0.02 * 0.002, 'noise_g 0.002, 25600 samples');
  });

  it('normalisation: an order far below fn reads its forcing amplitude; at fn it reads Q times it', () => {
    // 1X at 600 rpm = 10 Hz. Component A at 200 Hz (r = 0.05: |H| = 1.0025, closed form above).
    // Component B at exactly 10 Hz with zeta 0.05: |H| = Q = 10 (definition of Q, common practice).
    // Tolerance 1 %: bilinear warping at fs/fn >= 12.8 is below 0.5 % in |H| here.
    const p = profile({ segments: [{ kind: 'hold', durationS: 8 }] });
    const far = run(asset({ components: [component('stiff', 200, 0.05, ['1x'])] }), p)[0];
    const atFn = run(asset({ components: [component('panel', 10, 0.05, ['1x'])] }), p)[0];
    const from = 6 * 2560, to = 8 * 2560; // after 5+ s: 16 time constants at 10 Hz, zeta 0.05
    const rFar = 0.05;
    within('amplitude far below fn (g)', fitSine(far, 10, 2560, from, to).amplitude, 0.02 / Math.sqrt((1 - rFar ** 2) ** 2 + (2 * 0.05 * rFar) ** 2), 0.01 * 0.02, '1X 10 Hz, fn 200 Hz');
    within('amplitude at fn (g)', fitSine(atFn, 10, 2560, from, to).amplitude, 0.02 * 10, 0.01 * 0.2, '1X 10 Hz, fn 10 Hz, Q 10');
  });

  it('a component answers only to its own orders and adds only to its own sensors', () => {
    // Blade pass (7X = 70 Hz) at a panel tuned to 70 Hz that listens only to 1X: no gain.
    const p = profile({ forcing: [{ orderId: 'blade-pass', amplitudeG: 0.01, scaling: 'constant' }], segments: [{ kind: 'hold', durationS: 4 }] });
    const deaf = run(asset({ components: [component('panel', 70, 0.02, ['1x'])] }), p)[0];
    const twoSensors = asset({
      sensors: [
        { id: 'acc', channel: 0, units: 'g', scale: 1 },
        { id: 'far', channel: 2, units: 'g', scale: 1 },
      ],
      components: [component('panel', 70, 0.02, ['blade-pass'], ['acc'])],
    });
    const [near, , far] = run(twoSensors, p);
    const from = 3 * 2560, to = 4 * 2560;
    within('blade pass, component deaf to it (g)', fitSine(deaf, 70, 2560, from, to).amplitude, 0.01, 1e-4, 'orderIds [1x]');
    within('blade pass at the sensor the component reaches (g)', fitSine(near, 70, 2560, from, to).amplitude, 0.01 * 25, 0.01 * 0.25, 'Q 25 at fn');
    within('blade pass at a sensor it does not reach (g)', fitSine(far, 70, 2560, from, to).amplitude, 0.01, 1e-4, 'sensorIds [acc]');
  });

  it('orders stay phase-continuous through a ramp (no step larger than the fastest slope allows)', () => {
    // For a sum of sines the largest change per sample is at most sum(A_k 2 pi f_k)/fs (common practice).
    const a = asset();
    const p = profile({
      startRpm: 300,
      segments: [{ kind: 'ramp', toRpm: 1800, durationS: 2 }, { kind: 'ramp', toRpm: 300, durationS: 0.5 }],
      forcing: [{ orderId: '1x', amplitudeG: 0.02, scaling: 'constant' }, { orderId: 'blade-pass', amplitudeG: 0.01, scaling: 'constant' }],
    });
    const [x] = run(a, p, 100);
    const bound = ((0.02 * 2 * Math.PI * 30 + 0.01 * 2 * Math.PI * 210) / 2560) * 1.001;
    let worst = 0;
    for (let n = 1; n < x.length; n++) worst = Math.max(worst, Math.abs(x[n] - x[n - 1]));
    expect(worst).toBeLessThanOrEqual(bound);
  });

  it('speed-squared forcing scales with (rpm / top rpm)^2; units m/s^2 and a scale apply per sensor', () => {
    // At 600 rpm with a top of 1200 rpm: (600/1200)^2 = 0.25 of 0.02 g. m/s^2 = g x 9.80665
    // (standard gravity, exact by definition); raw = value / scale with scale 0.5.
    const a = asset({ sensors: [{ id: 'acc', channel: 0, units: 'm/s^2', scale: 0.5 }] });
    const p = profile({ segments: [{ kind: 'hold', durationS: 2 }, { kind: 'ramp', toRpm: 1200, durationS: 0.1 }], forcing: [{ orderId: '1x', amplitudeG: 0.02, scaling: 'speed-squared' }] });
    const [x] = run(a, p);
    within('raw amplitude', fitSine(x, 10, 2560, 0, 2 * 2560).amplitude, (0.25 * 0.02 * 9.80665) / 0.5, 1e-6, '600 of 1200 rpm');
  });

  it('refuses forcing for an order the asset lacks, with QB_E_PROFILE_ASSET', () => {
    const p = profile({ forcing: [{ orderId: 'gear-mesh', amplitudeG: 0.01, scaling: 'constant' }] });
    expect(() => run(asset(), p)).toThrowError(QbandError);
    expect(() => run(asset(), p)).toThrowError(/no order 'gear-mesh' \(its orders: 1x, blade-pass\)/);
  });

  it('a one-sample run', () => {
    const p = profile({ segments: [{ kind: 'hold', durationS: 1 / 2560 }] });
    const out = run(asset(), p);
    expect(out.map((c) => c.length)).toEqual([1, 1]);
    expect(out[1][0]).toBe(0); // no pulse at t = 0: the first mark is one revolution in
  });
});

describe('SeededRandom', () => {
  it('is reproducible and uniform on [0, 1)', () => {
    const a = new SeededRandom(42), b = new SeededRandom(42);
    const xs = Array.from({ length: 10000 }, () => a.uniform());
    expect(xs).toEqual(Array.from({ length: 10000 }, () => b.uniform()));
    expect(Math.min(...xs)).toBeGreaterThanOrEqual(0);
    expect(Math.max(...xs)).toBeLessThan(1);
    // Mean of 10000 uniforms: 0.5 with standard deviation 0.0029 (common practice); 5 sigma.
    within('mean', xs.reduce((s, x) => s + x) / xs.length, 0.5, 0.0145, '10000 draws');
  });
});
