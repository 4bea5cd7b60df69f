import { describe, expect, it } from 'vitest';
import { CicDecimator } from '../src/manipulation/cicDecimator.ts';
import { fitTonePeak, sine } from './support/signals.ts';

// Second-order CIC decimation: the response |sin(pi f R / fs) / (R sin(pi f / fs))|^2 is the
// standard comb-integrator result (common practice), computed here independently of the code,
// and held against sines pushed through in uneven blocks.
const FS = 25_600;
const R = 8;
function cic2Gain(fHz: number): number {
  const x = Math.PI * fHz / FS;
  return (Math.sin(R * x) / (R * Math.sin(x))) ** 2;
}

function run(freqHz: number): { out: Float32Array; fo: number } {
  const n = FS * 2;
  const x = sine(n, freqHz, FS, 1);
  const cic = new CicDecimator(R);
  const out = new Float32Array(n / R);
  let w = 0;
  // Uneven blocks: the phase must carry over.
  for (let i = 0, b = 0; i < n; b++) {
    const size = 1000 + 37 * (b % 5);
    w += cic.process(x.subarray(i, Math.min(n, i + size)), out.subarray(w));
    i += size;
  }
  expect(w).toBe(n / R);
  return { out, fo: FS / R };
}

describe('CicDecimator', () => {
  it('passes a low tone with the comb response and a delay of R - 1 input samples', () => {
    const f = 150;
    const { out, fo } = run(f);
    const steady = out.subarray(64);
    expect(fitTonePeak(steady, f, fo)).toBeCloseTo(cic2Gain(f), 4);
    // Output m is produced on input mR + R - 1 with content delayed R - 1: it is x(mR).
    for (const m of [100, 1001, 2345]) expect(out[m]).toBeCloseTo(cic2Gain(f) * Math.sin((2 * Math.PI * f * m * R) / FS), 3);
  });

  it('attenuates what would alias onto the low band as the comb response says (48 dB and more)', () => {
    for (const b of [50, 150]) {
      const f = FS / R - b; // folds onto b
      const { out, fo } = run(f);
      const got = fitTonePeak(out.subarray(64), b, fo);
      expect(got).toBeCloseTo(cic2Gain(f), 5);
      expect(20 * Math.log10(got)).toBeLessThan(-48);
    }
  });
});
