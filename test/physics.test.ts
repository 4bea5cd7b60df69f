import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { bearingOrders } from '../src/physics/bearingOrders.ts';
import { assetCrossings, crossingOf } from '../src/physics/crossings.ts';
import {
  displacementHalfPowerBand,
  qFromBand,
  qFromZeta,
  velocityHalfPowerBand,
  zetaFromQ,
} from '../src/physics/halfPowerBand.ts';
import {
  sdofAcceleration,
  sdofAmplification,
  sdofDisplacement,
  sdofPhaseDeg,
  sdofVelocity,
  ringCyclesToE,
} from '../src/physics/sdof.ts';
import { actualSeparationMargin, requiredSeparationMarginPct } from '../src/physics/separationMargin.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { Solver } from './support/odex.ts';



const TWO_PI = 2 * Math.PI;

/** Fails with input, expected, actual and tolerance in the message. */
function expectNear(what: string, actual: number, expected: number, tol: number): void {
  const err = Math.abs(actual - expected);
  expect(err <= tol, `${what}: expected ${expected}, actual ${actual}, |error| ${err} > tolerance ${tol}`).toBe(true);
}
function expectRel(what: string, actual: number, expected: number, relTol: number): void {
  expectNear(what, actual, expected, Math.abs(expected) * relTol);
}

/**
 * Integrates x'' + 2 zeta w0 x' + w0^2 x = force(t) (unit mass) from rest-or-`y0` with odex and
 * returns x and x' at the requested (ascending) times, read from odex's dense output.
 */
function integrate(
  fnHz: number,
  zeta: number,
  force: (t: number) => number,
  y0: [number, number],
  times: Float64Array,
): { x: Float64Array; v: Float64Array } {
  const w0 = TWO_PI * fnHz;
  const solver = new Solver(2);
  solver.absoluteTolerance = 1e-12;
  solver.relativeTolerance = 1e-12;
  solver.maxSteps = 1e6;
  solver.denseOutput = true;
  const x = new Float64Array(times.length);
  const v = new Float64Array(times.length);
  let k = 0;
  while (k < times.length && times[k] <= 0) {
    x[k] = y0[0];
    v[k] = y0[1];
    k++;
  }
  const result = solver.solve(
    (t, y) => [y[1], force(t) - 2 * zeta * w0 * y[1] - w0 * w0 * y[0]],
    0,
    [...y0],
    times[times.length - 1],
    (_n, _tOld, t, _y, dense) => {
      while (k < times.length && times[k] <= t) {
        x[k] = dense!(0, times[k]);
        v[k] = dense!(1, times[k]);
        k++;
      }
    },
  );
  expect(result.outcome, 'odex converged').toBe(0);
  expect(k, 'every requested time was sampled').toBe(times.length);
  return { x, v };
}

/**
 * Steady-state displacement amplitude and phase lag (deg) under F0/m = sin(2 pi f t), measured by
 * lock-in over the last `periods` forcing periods after `settleS` seconds of transient decay.
 */
function measuredSteadyState(fHz: number, fnHz: number, zeta: number): { amplitude: number; phaseDeg: number } {
  const w = TWO_PI * fHz;
  // The free transient decays as exp(-zeta w0 t); wait until it is below e^-25 (1.4e-11).
  const settleS = 25 / (zeta * TWO_PI * fnHz);
  const periodS = 1 / fHz;
  const periods = 4;
  const perPeriod = 256;
  const n = periods * perPeriod;
  const start = Math.ceil(settleS / periodS) * periodS;
  const times = new Float64Array(n);
  for (let i = 0; i < n; i++) times[i] = start + (i * periodS) / perPeriod;
  const { x } = integrate(fnHz, zeta, (t) => Math.sin(w * t), [0, 0], times);
  // x = A sin(w t - phi): (2/N) sum x sin(wt) = A cos(phi), (2/N) sum x cos(wt) = -A sin(phi);
  // the sum over whole periods of uniform samples is exact for a pure sinusoid.
  let a = 0;
  let b = 0;
  for (let i = 0; i < n; i++) {
    a += x[i] * Math.sin(w * times[i]);
    b += x[i] * Math.cos(w * times[i]);
  }
  a *= 2 / n;
  b *= 2 / n;
  return { amplitude: Math.hypot(a, b), phaseDeg: (Math.atan2(-b, a) * 180) / Math.PI };
}

describe('SDOF forced response, closed forms', () => {
  // Closed forms of the unit-mass SDOF (common practice, any vibration text): at fn the
  // amplification is Q = 1/(2 zeta) and the phase is 90 deg; well below fn the response is static.
  const fnHz = 10;
  const zeta = 0.05;
  const w0 = TWO_PI * fnHz;

  it('at fn: displacement 1/(2 zeta w0^2), phase 90 deg, amplification Q', () => {
    expectRel('X(fn)', sdofDisplacement(fnHz, fnHz, zeta), 1 / (2 * zeta * w0 * w0), 1e-12);
    expectNear('phase(fn) deg', sdofPhaseDeg(fnHz, fnHz, zeta), 90, 1e-9);
    expectRel('amplification(fn)', sdofAmplification(fnHz, fnHz, zeta), qFromZeta(zeta), 1e-12);
  });

  it('at 0 Hz: static deflection 1/w0^2, phase 0', () => {
    expectRel('X(0)', sdofDisplacement(0, fnHz, zeta), 1 / (w0 * w0), 1e-12);
    expectNear('phase(0)', sdofPhaseDeg(0, fnHz, zeta), 0, 1e-12);
  });

  it('at 2 fn: amplification 1/sqrt(9 + 16 zeta^2), phase 180 - atan(4 zeta/3)', () => {
    // r = 2: (1 - r^2)^2 + (2 zeta r)^2 = 9 + 16 zeta^2; tan(180 - phi) = 2 zeta r / (r^2 - 1).
    expectRel('amplification(2fn)', sdofAmplification(2 * fnHz, fnHz, zeta), 1 / Math.sqrt(9 + 16 * zeta * zeta), 1e-12);
    expectNear('phase(2fn)', sdofPhaseDeg(2 * fnHz, fnHz, zeta), 180 - (Math.atan((4 * zeta) / 3) * 180) / Math.PI, 1e-9);
  });

  it('velocity and acceleration are w X and w^2 X', () => {
    const f = 7.3;
    const w = TWO_PI * f;
    expectRel('V', sdofVelocity(f, fnHz, zeta), w * sdofDisplacement(f, fnHz, zeta), 1e-14);
    expectRel('A', sdofAcceleration(f, fnHz, zeta), w * w * sdofDisplacement(f, fnHz, zeta), 1e-14);
  });

  it('ring-down: e-fold in Q/pi cycles', () => {
    expectRel('ringCyclesToE(10)', ringCyclesToE(10), 10 / Math.PI, 1e-15);
  });
});

describe('SDOF forced response against numerical integration (odex)', () => {
  // Reference: odex (Gragg-Bulirsch-Stoer, general-purpose ODE solver from npm) integrating
  // x'' + 2 zeta w0 x' + w0^2 x = sin(w t) from rest. Tolerance: relative 1e-6 in amplitude and
  // 1e-4 deg in phase; the solver runs at 1e-12 and the transient has decayed to e^-25, so the
  // remaining error is far below these.
  const fnHz = 2;
  const zeta = 0.05;
  for (const r of [0.3, 0.8, 0.95, 1, 1.05, 1.5, 3]) {
    it(`frequency ratio ${r}: amplitude and phase`, () => {
      const fHz = r * fnHz;
      const m = measuredSteadyState(fHz, fnHz, zeta);
      expectRel(`amplitude at r=${r}`, m.amplitude, sdofDisplacement(fHz, fnHz, zeta), 1e-6);
      expectNear(`phase at r=${r} (deg)`, m.phaseDeg, sdofPhaseDeg(fHz, fnHz, zeta), 1e-4);
    });
  }
});

describe('velocity half-power band', () => {
  const fnHz = 14.2;
  const q = 8;
  const [lo, hi] = velocityHalfPowerBand(fnHz, q);
  const peak = sdofVelocity(fnHz, fnHz, zetaFromQ(q));

  it('closed form: velocity at lo and hi is 1/sqrt(2) of its peak at fn', () => {
    // Exact by construction of the band (derivation in src/physics/halfPowerBand.ts); 1e-12 is rounding.
    expectRel('V(lo)/V(fn)', sdofVelocity(lo, fnHz, zetaFromQ(q)) / peak, Math.SQRT1_2, 1e-12);
    expectRel('V(hi)/V(fn)', sdofVelocity(hi, fnHz, zetaFromQ(q)) / peak, Math.SQRT1_2, 1e-12);
  });

  it('is exactly fn/Q wide with geometric centre fn', () => {
    expectRel('width', hi - lo, fnHz / q, 1e-12);
    expectRel('geometric centre', Math.sqrt(lo * hi), fnHz, 1e-12);
    expectRel('qFromBand', qFromBand(lo, hi), q, 1e-12);
  });

  it('the peak of velocity is at fn: neighbours 0.1 % away are lower', () => {
    const z = zetaFromQ(q);
    expect(sdofVelocity(fnHz * 0.999, fnHz, z)).toBeLessThan(peak);
    expect(sdofVelocity(fnHz * 1.001, fnHz, z)).toBeLessThan(peak);
  });

  it('differs from fn(1 -/+ zeta) by fn(sqrt(1 + zeta^2) - 1), second order in zeta', () => {
    const z = zetaFromQ(q);
    expectRel('lo - fn(1 - zeta)', lo - fnHz * (1 - z), fnHz * (Math.sqrt(1 + z * z) - 1), 1e-9);
  });

  it('numerically (odex): velocity amplitude at lo and hi is 1/sqrt(2) of the one at fn', () => {
    // Velocity amplitude = w X; tolerance relative 1e-6 as for the forced-response checks.
    const z = zetaFromQ(q);
    const vPeak = TWO_PI * fnHz * measuredSteadyState(fnHz, fnHz, z).amplitude;
    const vLo = TWO_PI * lo * measuredSteadyState(lo, fnHz, z).amplitude;
    const vHi = TWO_PI * hi * measuredSteadyState(hi, fnHz, z).amplitude;
    expectRel('V(lo)/V(fn) numerical', vLo / vPeak, Math.SQRT1_2, 1e-6);
    expectRel('V(hi)/V(fn) numerical', vHi / vPeak, Math.SQRT1_2, 1e-6);
  });

  it('Q, zeta conversions: Q = 1/(2 zeta)', () => {
    expectRel('qFromZeta(0.03)', qFromZeta(0.03), 16.666666666666668, 1e-15);
    expectRel('zetaFromQ(8)', zetaFromQ(8), 0.0625, 1e-15);
  });
});

describe('displacement half-power band', () => {
  it('numerically (odex): displacement at its half-power points is 1/sqrt(2) of the resonant peak', () => {
    // The displacement peak sits at fn sqrt(1 - 2 zeta^2) (common practice, closed form).
    const fnHz = 2;
    const zeta = 0.1;
    const band = displacementHalfPowerBand(fnHz, zeta)!;
    const peak = measuredSteadyState(fnHz * Math.sqrt(1 - 2 * zeta * zeta), fnHz, zeta).amplitude;
    const lo = measuredSteadyState(band[0]!, fnHz, zeta).amplitude;
    const hi = measuredSteadyState(band[1], fnHz, zeta).amplitude;
    expectRel('X(lo)/X(peak)', lo / peak, Math.SQRT1_2, 1e-6);
    expectRel('X(hi)/X(peak)', hi / peak, Math.SQRT1_2, 1e-6);
  });

  it('sits below the velocity band (same Q)', () => {
    const zeta = 0.05;
    const d = displacementHalfPowerBand(10, zeta)!;
    const v = velocityHalfPowerBand(10, qFromZeta(zeta));
    expect(d[0]!).toBeLessThan(v[0]);
    expect(d[1]).toBeLessThan(v[1]);
  });

  it('lower point does not exist for zeta 0.5: the response never falls to half power below the peak', () => {
    const fnHz = 10;
    const zeta = 0.5;
    const band = displacementHalfPowerBand(fnHz, zeta)!;
    expect(band[0]).toBeNull();
    const peak = sdofDisplacement(fnHz * Math.sqrt(1 - 2 * zeta * zeta), fnHz, zeta);
    for (let f = 0; f < fnHz; f += 0.25) expect(sdofDisplacement(f, fnHz, zeta)).toBeGreaterThan(peak * Math.SQRT1_2);
    expectRel('X(hi)/X(peak)', sdofDisplacement(band[1], fnHz, zeta) / peak, Math.SQRT1_2, 1e-12);
  });

  it('no resonant peak at zeta = 1/sqrt(2) or above: null', () => {
    expect(displacementHalfPowerBand(10, Math.SQRT1_2)).toBeNull();
    expect(displacementHalfPowerBand(10, 0.9)).toBeNull();
  });
});

describe('free decay (odex)', () => {
  it('amplitude falls by e in about Q/pi cycles', () => {
    // Exact: sqrt(1 - zeta^2)/(2 pi zeta) cycles; Q/pi drops the sqrt(1 - zeta^2) factor
    // (0.02 % at zeta = 0.02). Tolerance: 1e-5 against the exact value (peaks refined by a
    // parabola through 2000 samples per period), 0.1 % against Q/pi.
    const fnHz = 1;
    const zeta = 0.02;
    const q = qFromZeta(zeta);
    const perPeriod = 2000;
    const periods = 30;
    const n = perPeriod * periods;
    const times = new Float64Array(n);
    for (let i = 0; i < n; i++) times[i] = (i * (1 / fnHz)) / perPeriod;
    const { x } = integrate(fnHz, zeta, () => 0, [1, 0], times);
    const peaks: number[] = [];
    for (let i = 1; i < n - 1; i++) {
      if (x[i] > x[i - 1] && x[i] >= x[i + 1]) {
        // Parabola through three samples: vertex height.
        const a = x[i - 1];
        const b = x[i];
        const c = x[i + 1];
        peaks.push(b - ((a - c) * (a - c)) / (8 * (a - 2 * b + c)));
      }
    }
    expect(peaks.length).toBeGreaterThan(20);
    // ln(peak) falls linearly with cycle count: least-squares slope.
    const k = peaks.map((_, i) => i);
    const lnA = peaks.map(Math.log);
    const kMean = k.reduce((s, v) => s + v, 0) / k.length;
    const lMean = lnA.reduce((s, v) => s + v, 0) / lnA.length;
    let num = 0;
    let den = 0;
    for (let i = 0; i < k.length; i++) {
      num += (k[i] - kMean) * (lnA[i] - lMean);
      den += (k[i] - kMean) ** 2;
    }
    const cyclesToE = -1 / (num / den);
    expectRel('cycles to e vs exact', cyclesToE, Math.sqrt(1 - zeta * zeta) / (TWO_PI * zeta), 1e-5);
    expectRel('cycles to e vs Q/pi', cyclesToE, ringCyclesToE(q), 1e-3);
  });
});

describe('separation margin', () => {
  // The required separation margin follows the API 684 rule from the amplification factor
  // (formula recalled from memory); that rule is written for rotor critical speeds and serves
  // here as a screening figure for structural resonances.
  // Caps of 16 % below and 26 % above the operating range, in the form commonly cited from
  // API 617 (8th edition, 6.8.2.5); the standard's own text was not available here to check against.
  // Worked by hand: AF 8 -> 17 (1 - 1/6.5) = 14.3846 % below, 24.3846 % above.
  it('AF 8: 14.38 % below the range, 24.38 % above', () => {
    expectNear('below, AF 8', requiredSeparationMarginPct(8, 'below'), 14.384615, 1e-6);
    expectNear('above, AF 8', requiredSeparationMarginPct(8, 'above'), 24.384615, 1e-6);
  });

  it('AF < 2.5 needs no margin (AF 2.49 and AF 0.5)', () => {
    expect(requiredSeparationMarginPct(2.49, 'below')).toBe(0);
    expect(requiredSeparationMarginPct(2.49, 'above')).toBe(0);
    expect(requiredSeparationMarginPct(0.5, 'above')).toBe(0);
  });

  it('caps the margin at 16 % below and 26 % above for very sharp resonances (AF 30)', () => {
    // By hand: 17 (1 - 1/28.5) = 16.404 % -> capped at 16; 10 + 16.404 = 26.404 -> capped at 26.
    expectNear('below, AF 30', requiredSeparationMarginPct(30, 'below'), 16, 1e-12);
    expectNear('above, AF 30', requiredSeparationMarginPct(30, 'above'), 26, 1e-12);
    // Just under where the caps bind (AF 18.5: 17 (1 - 1/17) = 16 exactly).
    expectNear('below, AF 18', requiredSeparationMarginPct(18, 'below'), 17 * (1 - 1 / 16.5), 1e-12);
  });

  it('exactly on AF 2.5: 0 % below, 10 % above', () => {
    // 17 (1 - 1/(2.5 - 1.5)) = 0 by hand.
    expectNear('below, AF 2.5', requiredSeparationMarginPct(2.5, 'below'), 0, 1e-12);
    expectNear('above, AF 2.5', requiredSeparationMarginPct(2.5, 'above'), 10, 1e-12);
  });

  it('actual margin: below min, above max, inside, exactly on an edge', () => {
    // By hand: (450 - 400)/450 = 11.111 %; (1500 - 1200)/1200 = 25 %.
    const range: [number, number] = [450, 1200];
    const below = actualSeparationMargin(400, range);
    expect(below.position).toBe('below');
    expectNear('below', below.marginPct, 11.111111, 1e-5);
    const above = actualSeparationMargin(1500, range);
    expect(above.position).toBe('above');
    expectNear('above', above.marginPct, 25, 1e-12);
    const inside = actualSeparationMargin(852, range);
    expect(inside.position).toBe('inside');
    // Nearer edge 1200: (1200 - 852)/1200 = 29 %.
    expectNear('inside', inside.marginPct, -29, 1e-9);
    expect(actualSeparationMargin(450, range)).toEqual({ position: 'inside', marginPct: -0 });
  });
});

describe('crossings', () => {
  it('the pinned example: speeds, bands and verdicts by hand', () => {
    const text = readFileSync(new URL('../config/example-map.yaml', import.meta.url), 'utf8');
    const { map } = parseAssetMap(text, 'example-map.yaml');
    const xs = assetCrossings(map!.assets[0]);
    // motor-reed: 1x only. discharge-pipe: every order (no `orders` list).
    expect(xs.map((x) => `${x.orderId}/${x.componentId}`)).toEqual([
      '1x/motor-reed',
      '1x/discharge-pipe',
      '2x/discharge-pipe',
      'vane-pass/discharge-pipe',
    ]);
    // By hand: 14.2 Hz * 60 / 1 = 852 rpm, inside 450-1200.
    expectNear('motor-reed 1x rpm', xs[0].speedRpm, 852, 1e-9);
    expect(xs[0].verdict).toBe('inside-range');
    // 83 Hz * 60 / 2 = 2490 rpm, above 1200 by 107.5 %; Q = 1/0.06 = 16.667,
    // required 10 + 17 (1 - 1/15.1667) = 25.879 %.
    expectNear('pipe 2x rpm', xs[2].speedRpm, 2490, 1e-9);
    expectNear('pipe 2x actual', xs[2].actualMarginPct, 107.5, 1e-9);
    expectNear('pipe 2x required', xs[2].requiredMarginPct, 25.879, 1e-3);
    expect(xs[2].verdict).toBe('margin-ok');
    // 83 * 60 / 5 = 996 rpm: inside.
    expectNear('pipe vane rpm', xs[3].speedRpm, 996, 1e-9);
    expect(xs[3].verdict).toBe('inside-range');
    // Speed band = band * 60 / multiple.
    const band = velocityHalfPowerBand(83, qFromZeta(0.03));
    expectRel('pipe 2x band lo', xs[2].speedBandRpm[0], (band[0] * 60) / 2, 1e-12);
  });

  it('margin short, and no margin needed for AF < 2.5', () => {
    // 21 Hz at 1x: 1260 rpm, 5 % above 1200 rpm; AF 8 needs 24.38 % (by hand).
    const short = crossingOf('1x', 1, 'c', 21, velocityHalfPowerBand(21, 8), 8, [450, 1200]);
    expect(short.verdict).toBe('margin-short');
    expect(short.bandOverlapsRange).toBe(true);
    const damped = crossingOf('1x', 1, 'c', 21, velocityHalfPowerBand(21, 2), 2, [450, 1200]);
    expect(damped.verdict).toBe('no-margin-needed');
  });
});

describe('bearing defect orders', () => {
  const recordings = new URL('../../shared/data/recordings/', import.meta.url);
  const manifestPath = fileURLToPath(new URL('manifest.json', recordings));
  const present = existsSync(manifestPath);
  if (!present) console.warn(`bearing-order checks skipped: ${manifestPath} not found`);

  /** Reads "NAME value" from the manifest's source text. */
  function published(text: string, name: string): number {
    const m = new RegExp(`${name} ([0-9.]+)`).exec(text);
    if (!m) throw new Error(`manifest text has no '${name} <value>': ${text}`);
    return Number(m[1]);
  }

  describe.skipIf(!present)('against manifest.json', () => {
    const manifest = present ? (JSON.parse(readFileSync(manifestPath, 'utf8')) as { sources: Record<string, string> }) : undefined;

    it('CWRU 6205 drive-end bearing: BPFI, BPFO, FTF, BSF (rolling element = 2 BSF)', () => {
      // Source: CWRU bearing data center values quoted in manifest.json. Geometry 9 balls,
      // d 0.3126 in, D 1.537 in. Tolerance relative 1e-4: the published multiples are given to
      // 5 significant figures and FTF differs from the kinematic value by 7e-5 relative.
      const text = manifest!.sources.cwru;
      const o = bearingOrders({
        rollingElements: Number(/(\d+) balls/.exec(text)![1]),
        elementDiameter: published(text, 'ball diameter'),
        pitchDiameter: published(text, 'pitch diameter'),
        contactAngleDeg: 0,
      });
      expectRel('CWRU BPFI', o.bpfi, published(text, 'BPFI'), 1e-4);
      expectRel('CWRU BPFO', o.bpfo, published(text, 'BPFO'), 1e-4);
      expectRel('CWRU FTF', o.ftf, published(text, 'FTF'), 1e-4);
      expectRel('CWRU rolling element (2 BSF)', 2 * o.bsf, published(text, 'rolling element'), 1e-4);
      expectRel('CWRU BSF', o.bsf, published(text, 'kinematic BSF is'), 1e-4);
    });

    it('MFPT geometry at 25 Hz: BPFO, BPFI, FTF, BSF in Hz', () => {
      // Source: MFPT values quoted in manifest.json (8 rollers, d 0.235, D 1.245, 25 Hz shaft).
      // Tolerance: one unit in the last published digit (0.001 Hz for BPFO/BPFI, 0.01 Hz for
      // FTF/BSF). The values are rounded, and BPFO 81.12450 appears as 81.125 (rounded twice, via
      // 81.1245), which half a unit would reject.
      const text = manifest!.sources.mfpt;
      const shaftHz = published(text, 'Shaft rate');
      const o = bearingOrders({
        rollingElements: Number(/(\d+) rollers/.exec(text)![1]),
        elementDiameter: published(text, 'roller diameter'),
        pitchDiameter: published(text, 'pitch diameter'),
        contactAngleDeg: published(text, 'contact angle'),
      });
      expectNear('MFPT BPFO Hz', o.bpfo * shaftHz, published(text, 'BPFO'), 0.001);
      expectNear('MFPT BPFI Hz', o.bpfi * shaftHz, published(text, 'BPFI'), 0.001);
      expectNear('MFPT FTF Hz', o.ftf * shaftHz, published(text, 'FTF'), 0.01);
      expectNear('MFPT BSF Hz', o.bsf * shaftHz, published(text, 'BSF'), 0.01);
    });
  });
});
