import { describe, expect, it } from 'vitest';
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
import { expectNear, expectRel } from './support/expectNear.ts';
import { Solver } from './support/odex.ts';

// The SDOF formulas of src/physics (forced response, half-power bands, free decay) against their
// closed forms and a numerical integration with odex. Separation margins and crossings:
// test/physicsSeparation.test.ts; bearing orders: test/physicsBearings.test.ts.

const TWO_PI = 2 * Math.PI;

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
