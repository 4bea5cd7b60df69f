import { describe, expect, it } from 'vitest';
import { Solver } from './support/odex.ts';
import { fitSine, within } from './support/simulationFixtures.ts';
import { SdofResonator } from '../src/simulation/sdofResonator.ts';

// The simulator's digital resonator against the SDOF closed forms and an ODE integration.
// The rest of the simulator: simulateSynthesis (speed schedule, synthesis, seeded noise),
// simulateProfile (the profile YAML), simulateCommand (`qband simulate` on real files).

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
