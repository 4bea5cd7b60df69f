import { describe, expect, it } from 'vitest';
import { Decimator } from '../src/manipulation/decimator.ts';
import { float32Stages } from '../src/manipulation/decimatorFloat32.ts';
import { spectrumKernel } from '../src/manipulation/spectrumKernel.ts';
import { expectKernelStagesMatchPlain } from './support/decimatorRuns.ts';
import { gaussianNoise, sine } from './support/signals.ts';

// The float32 cascade the rolling spectra use (decimatorFloat32.ts). Its response is checked
// with the float64 one in decimator.test.ts; here: the kernel against the JavaScript stages,
// bit for bit, and what rounding to float32 at every step costs against the same filters in
// float64.

function signal(n: number, seed: number): Float32Array {
  // A large low tone, a small high one and broadband noise, as an accelerometer channel carries.
  const low = sine(n, 29.5, 25_600, 3, 0.3);
  const high = sine(n, 1_210, 25_600, 0.01, 1.1);
  const noise = gaussianNoise(n, 0.05, seed);
  const x = new Float32Array(n);
  for (let i = 0; i < n; i++) x[i] = low[i] + high[i] + noise[i];
  return x;
}

describe('Decimator, float32 stages', () => {
  it('the WebAssembly stages give every output bit for bit as the JavaScript stages, whatever the blocks, several decimators taking turns', () => {
    expect(spectrumKernel(), 'the WebAssembly SIMD kernel loads on this Node').not.toBeNull();
    // Blocks of 1, odd, even and over the kernel's 2048-sample step, a reset in the middle,
    // factors 2 to 64, decimators interleaved block by block (they share the kernel's buffers).
    expectKernelStagesMatchPlain([2, 8, 64, 16], { precision: 'float32' }, [1, 7, 256, 3, 1000, 2, 4099, 1, 513, 20000, 5, 2047, 2049], 5);
  });

  for (const factor of [2, 16, 64]) {
    it(`factor ${factor}: every output within 1e-6 of the signal's peak of the same filters in float64, and the same count`, () => {
      // Reference: the same stages (float32Stages: the float32 taps, exact in float64) run in
      // float64 in the plainest form, each output from its whole window. Float32 keeps 24 bits:
      // each of a stage's roundings adds at most half a unit in the last place, and later
      // stages see earlier errors filtered. Measured on this signal: 3e-7 to 6e-7 of the peak.
      const n = 200_000;
      const x = signal(n, factor);
      const single = new Decimator(factor, { precision: 'float32' });
      const b = new Float32Array(n / factor + 1);
      let mb = 0;
      for (let start = 0; start < n; start += 4096) mb += single.process(x.subarray(start, Math.min(n, start + 4096)), b.subarray(mb));
      let ref: Float64Array = Float64Array.from(x);
      for (const { taps, half } of float32Stages(Math.log2(factor))) {
        // Zero history before the first input, as the cascade starts; output m completes input 2m + 1.
        const next = new Float64Array(Math.floor(ref.length / 2));
        for (let m = 0; m < next.length; m++) {
          const c = 2 * m + 1 - half;
          const at = (k: number): number => (k >= 0 && k < ref.length ? ref[k] : 0);
          let acc = 0.5 * at(c);
          for (let j = 0; j < taps.length; j++) acc += taps[j] * (at(c - 2 * j - 1) + at(c + 2 * j + 1));
          next[m] = acc;
        }
        ref = next;
      }
      expect(mb).toBe(ref.length);
      let peak = 0;
      let worst = 0;
      for (let i = 0; i < mb; i++) {
        peak = Math.max(peak, Math.abs(ref[i]));
        worst = Math.max(worst, Math.abs(ref[i] - b[i]));
      }
      expect(worst / peak).toBeLessThan(1e-6);
      // And the two are not the same numbers: the float32 stages round where float64 does not.
      expect(worst).toBeGreaterThan(0);
    });
  }

  it('streams: any split of the input into blocks gives the same output as one block', () => {
    const x = signal(9000, 3);
    const whole = new Float32Array(9000);
    const nWhole = new Decimator(8, { precision: 'float32' }).process(x, whole);
    const d = new Decimator(8, { precision: 'float32' });
    const parts: number[] = [];
    const out = new Float32Array(9000);
    for (const [a, b] of [[0, 1], [1, 7], [7, 8], [8, 2100], [2100, 2103], [2103, 9000]]) {
      const k = d.process(x.subarray(a, b), out);
      parts.push(...out.subarray(0, k));
    }
    expect(parts).toEqual(Array.from(whole.subarray(0, nWhole)));
  });
});
