import { DEFAULT_TRANSIENT_SETTINGS } from '../src/transients/transientSettings.ts';
import { describe, expect, it } from 'vitest';
import { Solver } from './support/odex.ts';
import type { AssetConfig, ComponentConfig } from '../src/config/types.ts';
import { QbandError } from '../src/errors.ts';
import { SeededRandom } from '../src/simulation/prng.ts';
import { checkProfileAgainstAsset, parseProfile, type Profile } from '../src/simulation/profile.ts';
import { SdofResonator } from '../src/simulation/sdofResonator.ts';
import { revolutionsAt, rpmAt, speedSchedule } from '../src/simulation/speedSchedule.ts';
import { synthesize, synthesisLayout } from '../src/simulation/synthesize.ts';

// ---------------------------------------------------------------------------------------------
// Fixtures: an asset built by hand (the simulator must not depend on the map parser).

function component(id: string, fnHz: number, zeta: number, orderIds: string[], sensorIds = ['acc']): ComponentConfig {
  const q = 1 / (2 * zeta);
  return { id, fnHz, q, zeta, bandHz: [fnHz * (1 - zeta), fnHz * (1 + zeta)], dampingGiven: 'zeta', orderIds, sensorIds };
}

function asset(overrides: Partial<AssetConfig> = {}): AssetConfig {
  return {
    id: 'test-fan',
    description: 'fan on a test stand',
    procedure: 'test procedure',
    speed: { source: 'tach', channel: 1, pulsesPerRev: 1, rangeRpm: [300, 1800], minConfidence: 0.6, maxAgeS: 2 },
    orders: [
      { id: '1x', multiple: 1, kind: 'multiple', derivation: 'multiple 1' },
      { id: 'blade-pass', multiple: 7, kind: 'blade-pass', derivation: '7 blades' },
    ],
    sensors: [{ id: 'acc', channel: 0, units: 'g', scale: 1 }],
    transients: { ...DEFAULT_TRANSIENT_SETTINGS },
    components: [],
    alarm: { onDelayS: 30, offDelayS: 10, deadbandPct: 1, priority: 'high', escalateAfterS: 300, escalateGrowth: 2 },
    analysis: { frameSize: 4096, overlap: 0.5, averages: 4, decimation: 1, decisionStepS: 1 },
    severity: { zoneBoundariesMmS: [2.8, 7.1, 18], basis: 'test' },
    ...overrides,
  };
}

function profile(overrides: Partial<Profile> = {}): Profile {
  return {
    sampleRateHz: 2560,
    startRpm: 600,
    segments: [{ kind: 'hold', durationS: 2 }],
    forcing: [{ orderId: '1x', amplitudeG: 0.02, scaling: 'constant' }],
    noiseG: 0,
    seed: 7,
    ...overrides,
  };
}

/** All blocks of a synthesis joined into whole channels. */
function run(a: AssetConfig, p: Profile, framesPerBlock = 4096): Float32Array[] {
  const layout = synthesisLayout(a, p);
  const out = layout.channelNames.map(() => new Float32Array(layout.frames));
  for (const b of synthesize(a, p, { framesPerBlock })) b.channels.forEach((c, i) => out[i].set(c, b.startFrame));
  return out;
}

/** Least-squares fit of y ~ A sin(w t - phi) over samples [from, to): returns A and phi (rad). */
function fitSine(y: ArrayLike<number>, fHz: number, fsHz: number, from: number, to: number): { amplitude: number; lagRad: number } {
  let ss = 0, cc = 0, sc = 0, ys = 0, yc = 0;
  for (let n = from; n < to; n++) {
    const w = (2 * Math.PI * fHz * n) / fsHz;
    const s = Math.sin(w), c = Math.cos(w);
    ss += s * s; cc += c * c; sc += s * c; ys += y[n] * s; yc += y[n] * c;
  }
  const det = ss * cc - sc * sc;
  const a = (ys * cc - yc * sc) / det; // coefficient of sin = A cos(phi)
  const b = (yc * ss - ys * sc) / det; // coefficient of cos = -A sin(phi)
  return { amplitude: Math.hypot(a, b), lagRad: Math.atan2(-b, a) };
}

function within(label: string, actual: number, expected: number, tol: number, input: string): void {
  if (!(Math.abs(actual - expected) <= tol)) {
    expect.fail(`${label}: input ${input}; expected ${expected}, actual ${actual}, |diff| ${Math.abs(actual - expected)} > tolerance ${tol}`);
  }
}

// ---------------------------------------------------------------------------------------------

describe('SDOF resonator (bilinear transform prewarped at fn)', () => {
  // Reference: the SDOF dynamic amplification factor and phase lag,
  //   |H| = 1 / sqrt((1 - r^2)^2 + (2 zeta r)^2),  phase = atan2(2 zeta r, 1 - r^2),
  // the standard result of any vibration textbook (e.g. Thomson, "Theory of Vibration with
  // Applications", ch. 3; common practice).
  // Tolerance: 1 % of |H| and 0.01 rad. The bilinear map warps frequency by
  // tan(pi f/fs)/(pi f/fs) against the same at fn; at fs = 128 fn and r <= 4 that shifts r by at
  // most 0.3 %, which moves |H| by at most 0.7 % (at r = 4) and the phase by under 0.005 rad.
  const fnHz = 20;
  const fs = 2560;
  const zeta = 0.05;
  for (const r of [0.2, 0.5, 0.9, 0.97, 1, 1.03, 1.1, 2, 4]) {
    it(`steady state at r = ${r} matches the SDOF closed form`, () => {
      const res = new SdofResonator(fnHz, zeta, fs);
      const f = r * fnHz;
      const settle = Math.ceil((20 / (zeta * 2 * Math.PI * fnHz)) * fs); // 20 time constants: e^-20
      const total = settle + fs; // then one second to fit over
      const y = new Float64Array(total);
      for (let n = 0; n < total; n++) y[n] = res.step(Math.sin((2 * Math.PI * f * n) / fs));
      const fit = fitSine(y, f, fs, settle, total);
      const expectedAmp = 1 / Math.sqrt((1 - r * r) ** 2 + (2 * zeta * r) ** 2);
      const expectedLag = Math.atan2(2 * zeta * r, 1 - r * r);
      within('|H|', fit.amplitude, expectedAmp, 0.01 * expectedAmp, `r=${r}, zeta=${zeta}, fs/fn=${fs / fnHz}`);
      within('phase lag (rad)', fit.lagRad, expectedLag, 0.01, `r=${r}, zeta=${zeta}`);
    });
  }

  it('has gain exactly Q at fn (prewarping) and exactly 1 at DC (bilinear maps z = 1 to s = 0)', () => {
    const res = new SdofResonator(83, 0.03, 2560);
    // Evaluate the digital transfer function directly: H(z) = (b0 + b1 z^-1 + b2 z^-2) / (1 + a1 z^-1 + a2 z^-2).
    const h = (fHz: number) => {
      const w = (2 * Math.PI * fHz) / 2560;
      const re = (c0: number, c1: number, c2: number) => c0 + c1 * Math.cos(w) + c2 * Math.cos(2 * w);
      const im = (c1: number, c2: number) => -c1 * Math.sin(w) - c2 * Math.sin(2 * w);
      return Math.hypot(re(res.b0, res.b1, res.b2), im(res.b1, res.b2)) / Math.hypot(re(1, res.a1, res.a2), im(res.a1, res.a2));
    };
    // Q = 1/(2 zeta) = 16.667 (definition, common practice); rounding only: 1e-9 relative.
    within('|H(fn)|', h(83), 1 / 0.06, 1e-9 / 0.06, 'fn=83 Hz, zeta=0.03, fs=2560 Hz');
    within('|H(0)|', h(0), 1, 1e-12, 'DC');
  });

  it('free decay falls by e in about Q/pi cycles', () => {
    // Reference: envelope exp(-zeta w0 t); it falls by e in t = 1/(zeta w0), i.e.
    // sqrt(1 - zeta^2)/(2 pi zeta) = Q sqrt(1 - zeta^2)/pi damped cycles (log decrement, any
    // vibration textbook; common practice). Tolerance 2 %: pole shift of the bilinear map at
    // fn/fs = 1/51 (< 0.5 %) plus peak sampling at 51 samples per cycle (fitted over 30 cycles).
    const q = 10;
    const zeta = 1 / (2 * q);
    const fn = 50;
    const fs = 2550;
    const res = new SdofResonator(fn, zeta, fs);
    // Drive at fn for 2 s (ring up), then stop and record the ringing.
    for (let n = 0; n < 2 * fs; n++) res.step(Math.sin((2 * Math.PI * fn * n) / fs));
    const ring = Float64Array.from({ length: 2 * fs }, () => res.step(0));
    const peaks: number[] = [];
    for (let n = 1; n < ring.length - 1; n++) if (ring[n] > ring[n - 1] && ring[n] >= ring[n + 1] && ring[n] > 0) peaks.push(ring[n]);
    const used = peaks.slice(1, 31); // skip the first half-cycle after the drive stops
    // Least-squares slope of ln(peak) per cycle.
    const xs = used.map((_, i) => i), ys = used.map((p) => Math.log(p));
    const mx = xs.reduce((a, b) => a + b) / xs.length, my = ys.reduce((a, b) => a + b) / ys.length;
    const slope = xs.reduce((s, x, i) => s + (x - mx) * (ys[i] - my), 0) / xs.reduce((s, x) => s + (x - mx) ** 2, 0);
    const cyclesToE = -1 / slope;
    const expected = (q * Math.sqrt(1 - zeta * zeta)) / Math.PI;
    within('cycles to fall by e', cyclesToE, expected, 0.02 * expected, `Q=${q}, fn=${fn} Hz, fs=${fs} Hz`);
  });

  it('follows an independent ODE integration (odex) through a sweep across fn, ringing included', () => {
    // Reference: odex (Gragg-Bulirsch-Stoer integrator from the registry) solving
    //   x'' + 2 zeta w0 x' + w0^2 x = w0^2 u(t),  u = sin(2 pi (f0 t + k t^2 / 2)), 10 -> 30 Hz in 4 s.
    // Tolerance: 1.5 % of the peak response. The digital filter sees u only at the samples, and
    // the bilinear map shifts the response of a sweep slightly in frequency (about 0.2 % at 30 Hz
    // for fs = 2560 Hz), which on the steep skirt of a Q = 25 peak reaches about 1 % of the peak.
    const fn = 20, zeta = 0.02, fs = 2560, f0 = 10, k = 5, seconds = 4;
    const w0 = 2 * Math.PI * fn;
    const u = (t: number) => Math.sin(2 * Math.PI * (f0 * t + (k * t * t) / 2));
    const res = new SdofResonator(fn, zeta, fs);
    const digital = Float64Array.from({ length: seconds * fs + 1 }, (_, n) => res.step(u(n / fs)));
    const solver = new Solver(2);
    solver.denseOutput = true;
    solver.absoluteTolerance = solver.relativeTolerance = 1e-10;
    const ode: number[] = [];
    solver.solve(
      (t: number, y: number[]) => [y[1], w0 * w0 * (u(t) - y[0]) - 2 * zeta * w0 * y[1]],
      0,
      [0, 0],
      seconds,
      solver.grid(1 / fs, (_t: number, y: number[]) => {
        ode.push(y[0]);
      }),
    );
    const n = Math.min(ode.length, digital.length);
    let peak = 0, worst = 0, at = 0;
    for (let i = 0; i < n; i++) {
      peak = Math.max(peak, Math.abs(ode[i]));
      const d = Math.abs(ode[i] - digital[i]);
      if (d > worst) [worst, at] = [d, i];
    }
    // The sweep passes fn: the response must rise well above the static gain of 1.
    expect(peak).toBeGreaterThan(5);
    within(`worst difference (at sample ${at})`, worst, 0, 0.015 * peak, `sweep ${f0}->${f0 + k * seconds} Hz, fn=${fn}, zeta=${zeta}, peak ${peak.toFixed(3)}`);
  });
});

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

describe('speed profile YAML', () => {
  const good = `asset: test-fan
sample_rate_hz: 2560
start_rpm: 450
segments:
  - { hold_s: 10 }
  - { ramp_to_rpm: 852, over_s: 20 }
forcing:
  1x: 0.02
  blade-pass: { amplitude_g: 0.01, scaling: constant }
noise_g: 0.002
seed: 7
`;
  it('reads the example', () => {
    const { profile: p, problems } = parseProfile(good);
    expect(problems).toEqual([]);
    expect(p).toEqual({
      assetId: 'test-fan',
      sampleRateHz: 2560,
      startRpm: 450,
      segments: [{ kind: 'hold', durationS: 10 }, { kind: 'ramp', toRpm: 852, durationS: 20 }],
      forcing: [{ orderId: '1x', amplitudeG: 0.02, scaling: 'speed-squared' }, { orderId: 'blade-pass', amplitudeG: 0.01, scaling: 'constant' }],
      noiseG: 0.002,
      seed: 7,
    });
  });

  it('reports every problem at once with path, line and column, under QB_E_PROFILE_INVALID', () => {
    const bad = `sample_rate_hz: 2560.5
start_rpm: -1
segmnets: []
forcing:
  1x: { amplitude_g: 0.02, scaling: cubic }
`;
    const { profile: p, problems } = parseProfile(bad);
    expect(p).toBeNull();
    expect(problems.map((x) => [x.code, x.message])).toEqual([
      ['QB_E_PROFILE_INVALID', 'segments: required, must be a list of segments ({ hold_s } or { ramp_to_rpm, over_s }) (line 1, col 1)'],
      ['QB_E_PROFILE_INVALID', 'sample_rate_hz: must be an integer >= 1 and <= 1000000, got 2560.5 (line 1, col 17)'],
      ['QB_E_PROFILE_INVALID', 'start_rpm: must be a number >= 0 and <= 1000000, got -1 (line 2, col 12)'],
      ['QB_E_PROFILE_INVALID', "segmnets: unknown key, did you mean 'segments'? (line 3, col 1)"],
      ['QB_E_PROFILE_INVALID', "forcing.1x.scaling: must be one of 'speed-squared', 'constant', got 'cubic' (line 5, col 37)"],
    ]);
  });

  it('a segment is a hold or a ramp, not both; lengths must be > 0', () => {
    const { problems } = parseProfile('sample_rate_hz: 100\nstart_rpm: 0\nforcing: {}\nsegments:\n  - { hold_s: 0 }\n  - { hold_s: 1, ramp_to_rpm: 5 }\n  - { ramp_to_rpm: 5 }\n');
    expect(problems.map((x) => x.message)).toEqual([
      'segments[0].hold_s: must be a number > 0, got 0 (line 5, col 15)',
      "segments[1].ramp_to_rpm: does not apply here: a segment is either a hold (hold_s) or a ramp (ramp_to_rpm with over_s) (line 6, col 18)",
      'segments[2].over_s: required, must be a number > 0 (line 7, col 5)',
    ]);
  });

  it('YAML that does not parse is QB_E_PROFILE_SYNTAX with its line', () => {
    const { problems } = parseProfile('sample_rate_hz: 2560\nsegments: [ { hold_s: 1 }\n');
    expect(problems[0].code).toBe('QB_E_PROFILE_SYNTAX');
    expect(problems[0].line).toBeGreaterThanOrEqual(2);
  });

  it('checks the profile against the asset: asset id, order ids (with line) and the Nyquist margin', () => {
    const text = good.replace('asset: test-fan', 'asset: other-fan').replace('  1x: 0.02', '  1x: 0.02\n  4x: 0.01').replace('sample_rate_hz: 2560', 'sample_rate_hz: 150');
    const { profile: p, positions, problems } = parseProfile(text);
    expect(problems).toEqual([]);
    const found = checkProfileAgainstAsset(p!, asset(), positions).map((x) => [x.code, x.message]);
    expect(found).toEqual([
      ['QB_E_PROFILE_ASSET', "asset: profile is for asset 'other-fan', but it is being run on 'test-fan' (line 1, col 8)"],
      ['QB_E_PROFILE_ASSET', "forcing.4x: asset 'test-fan' has no order '4x' (its orders: 1x, blade-pass) (line 9, col 3)"],
      // 7 x 852 / 60 = 99.4 Hz >= 0.45 x 150 = 67.5 Hz; raise to above 99.4/0.45 = 221 Hz.
      ['QB_E_PROFILE_ASSET', "forcing.blade-pass: order 'blade-pass' reaches 99.40 Hz at 852 rpm, too close to half the sample rate; raise sample_rate_hz above 221 (line 10, col 3)"],
    ]);
  });
});

describe('qband simulate (command, real files)', async () => {
  const { mkdtempSync, readFileSync, writeFileSync } = await import('node:fs');
  const { tmpdir } = await import('node:os');
  const { join } = await import('node:path');
  const { runSimulate } = await import('../src/cli/simulate.ts');
  const { readWavInfo, readWavBlocks } = await import('../src/acquisition/wav.ts');
  const dir = mkdtempSync(join(tmpdir(), 'qband-sim-'));
  const repo = new URL('..', import.meta.url).pathname;
  const call = async (...args: string[]) => {
    let out = '', err = '';
    const code = await runSimulate(args, { stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s) }, cwd: repo });
    return { code, out, err };
  };
  // The demo map with a 12-second profile of its own.
  const shortProfile = join(dir, 'short.yaml');
  writeFileSync(shortProfile, 'asset: cw-pump-2\nsample_rate_hz: 2560\nstart_rpm: 600\nsegments:\n  - { hold_s: 2 }\n  - { ramp_to_rpm: 1200, over_s: 10 }\nforcing:\n  1x: 0.02\n  vane-pass: 0.01\nnoise_g: 0.001\nseed: 3\n');

  it('writes a pcm16 WAV with sensor and tach channels, a speed CSV, and a one-line summary', async () => {
    const wav = join(dir, 'short.wav');
    const csv = join(dir, 'speed.csv');
    const r = await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', wav, '--format', 'pcm16', `--speed-out=${csv}`);
    expect(r.err).toBe('');
    expect(r.code).toBe(0);
    expect(r.out).toMatch(/^wrote .*short\.wav: cw-pump-2, 12\.0 s at 2560 Hz, 2 channels \(0 motor-top-x \(g\), 1 tach \(1 pulse\/rev\)\), pcm16, 0\.12 MB; speed series in .*speed\.csv\n$/);
    expect(await readWavInfo(wav)).toEqual({ sampleRateHz: 2560, channels: 2, frames: 12 * 2560, format: 'pcm16' });
    let tachMax = 0;
    for await (const b of readWavBlocks(wav, 4096)) tachMax = Math.max(tachMax, ...b.channels[1]);
    expect(tachMax).toBe(0.5); // pcm16 tach level; 0.5 is exact in 16-bit PCM
    const rows = readFileSync(csv, 'utf8').trim().split('\n');
    expect(rows[0]).toBe('time_s,rpm');
    expect(rows.length).toBe(1 + 121); // 0.0 .. 12.0 s every 0.1 s
    expect(rows[71]).toBe('7.0,900.00'); // 600 + 600 x (7 - 2)/10, hand computation
  });

  it('same profile and seed give byte-identical files', async () => {
    const a = join(dir, 'a.wav'), b = join(dir, 'b.wav');
    await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', a);
    await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', b);
    expect(readFileSync(a).equals(readFileSync(b))).toBe(true);
  });

  it('an invalid profile exits 1 with every located problem on stderr', async () => {
    const bad = join(dir, 'bad.yaml');
    writeFileSync(bad, 'asset: cw-pump-2\nsample_rate_hz: 2560\nstart_rpm: 600\nsegments: [ { hold_s: 1 } ]\nforcing:\n  1X: 0.02\n');
    const r = await call('--map', 'config/demo-map.yaml', '--profile', bad, '-o', join(dir, 'never.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toBe(`${bad}: error QB_E_PROFILE_ASSET forcing.1X: asset 'cw-pump-2' has no order '1X' (its orders: 1x, 2x, vane-pass, motor-bpfo) (line 6, col 3)\n`);
  });

  it('command-line mistakes exit 2 with QB_E_USAGE', async () => {
    expect((await call('--map', 'config/demo-map.yaml')).err).toMatch(/missing --profile <file> \[QB_E_USAGE\]/);
    expect((await call('--map', 'x', '--profile', 'y', '-o', 'z', '--format', 'pcm24')).err).toMatch(/--format must be one of float32, pcm16, got 'pcm24'/);
    expect((await call('--bogus')).code).toBe(2);
  });

  it('an --asset the map lacks is an input that cannot be used: exit 1, QB_E_ASSET_UNKNOWN', async () => {
    const r = await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', join(dir, 'x.wav'), '--asset', 'cw-pump-9');
    expect([r.code, r.err]).toEqual([1, "qband simulate: no asset 'cw-pump-9' in the map; it has: cw-pump-2 [QB_E_ASSET_UNKNOWN]\n"]);
  });

  it('an unwritable output is QB_E_FILE_WRITE, exit 1', async () => {
    const r = await call('--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', join(dir, 'no-such-dir', 'x.wav'));
    expect(r.code).toBe(1);
    expect(r.err).toMatch(/cannot create .*\[QB_E_FILE_WRITE\]/);
  });

  it('the committed demo recording is what the demo map and profile produce', async () => {
    const demo = join(repo, 'demo/north-basin-runup.wav');
    const again = join(dir, 'demo.wav');
    const r = await call('--map', 'config/demo-map.yaml', '--profile', 'config/demo-profile.yaml', '-o', again, '--format', 'pcm16');
    expect(r.code).toBe(0);
    expect(readFileSync(again).equals(readFileSync(demo)), 'demo/north-basin-runup.wav is stale: regenerate it with the command in docs/simulate.md').toBe(true);
  });

  it('shows progress on stderr only when it is a terminal', async () => {
    let err = '';
    const code = await runSimulate(['--map', 'config/demo-map.yaml', '--profile', shortProfile, '-o', join(dir, 'tty.wav')], {
      stdout: { write: () => true },
      stderr: { write: (s: string) => (err += s), isTTY: true },
      cwd: repo,
    });
    expect(code).toBe(0);
    expect(err).toContain('simulate [');
    expect(err).toContain('100% 12/12 s');
  });

  it('--help prints the options', async () => {
    const r = await call('--help');
    expect(r.code).toBe(0);
    expect(r.out).toContain('--speed-out <file>');
  });
});
