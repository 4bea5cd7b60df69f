import { describe, expect, it } from 'vitest';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { TachlessTracker } from '../src/manipulation/tachlessTracker.ts';
import { WarpedSpectrum } from '../src/manipulation/warpedSpectrum.ts';
import { chirpSignal, DEMO_PUMP_ORDERS } from './support/chirp.ts';

// The tachless tracker's frames take the engine's FFT backend: pffft (WebAssembly, float32
// arithmetic) where it loads. Reference: fft.js, a general-purpose float64 transform from the
// registry. A float32 transform of a frame of 1024 points carries rounding of about 1e-7 of the
// frame's peak; the estimator resolves speed to about 0.01 % at best (docs/engine.md), so the
// tolerances below (1e-6 of the peak, 1e-6 of the speed) are far below anything it can see and
// far above float32 rounding. A backend that read the wrong lines, dropped the window or
// scaled differently would miss them by orders of magnitude.
const FS = 2560;
const ORDERS = DEMO_PUMP_ORDERS;

describe("the tachless tracker's transform backend", () => {
  it('gives the warped amplitudes of fft.js within 1e-6 of the frame peak', async () => {
    const pffft = await createRealFft(64);
    const x = chirpSignal({ profile: { startHz: 8, segments: [{ durS: 6, toHz: 19.5 }] }, rateHz: 400, refHz: 1100 / 60, orders: ORDERS, noiseG: 0.002, seed: 3 });
    const reference = new WarpedSpectrum(1024, 4 / 3, x.length);
    const wasm = new WarpedSpectrum(1024, 4 / 3, x.length, true, 513, pffft);
    let worst = 0;
    for (let c = 300; c < x.length - 300; c += 97) {
      for (const beta of [0, 0.12, -0.3]) {
        const a = Float64Array.from(reference.compute(x, c, 400, beta));
        const b = wasm.compute(x, c, 400, beta);
        const peak = Math.max(...a);
        for (let k = 0; k < a.length; k++) worst = Math.max(worst, Math.abs(a[k] - b[k]) / peak);
      }
    }
    expect(worst, 'largest amplitude difference, share of the frame peak').toBeLessThan(1e-6);
    expect(worst, 'the backends must be different transforms').toBeGreaterThan(0);
  });

  it('gives the speeds and the trust of fft.js through a hold and a ramp', async () => {
    const pffft = await createRealFft(64);
    const profile = { startHz: 10, segments: [{ durS: 4, toHz: 10 }, { durS: 4, toHz: 17 }, { durS: 3, toHz: 17 }] };
    const x = chirpSignal({ profile, rateHz: FS, refHz: 1100 / 60, orders: ORDERS, noiseG: 0.004, structural: { fnHz: 14.2, q: 8, levelG: 0.001 }, seed: 21 });
    const reference = new TachlessTracker({ inputRateHz: FS, rangeRpm: [450, 1200], minConfidence: 0.6 });
    const wasm = new TachlessTracker({ inputRateHz: FS, rangeRpm: [450, 1200], minConfidence: 0.6, fft: pffft });
    let compared = 0;
    let worst = 0;
    for (let i = 0; i < x.length; i += 256) {
      const a = reference.push(x.subarray(i, i + 256), i / FS);
      const b = wasm.push(x.subarray(i, i + 256), i / FS);
      expect(b.length).toBe(a.length);
      for (let j = 0; j < a.length; j++) {
        const p = a[j];
        const q = b[j];
        expect(q.tS).toBe(p.tS);
        if (p.rpm === null || q.rpm === null) {
          expect(q.rpm, `at ${p.tS.toFixed(2)} s`).toBe(p.rpm);
          continue;
        }
        expect('confidence' in q && q.confidence >= 0.6, `trust at ${p.tS.toFixed(2)} s`).toBe('confidence' in p && p.confidence >= 0.6);
        worst = Math.max(worst, Math.abs(q.rpm / p.rpm - 1));
        compared++;
      }
    }
    expect(compared).toBeGreaterThan(30);
    expect(worst, 'largest relative speed difference').toBeLessThan(1e-6);
  });
});
