import { describe, expect, it } from 'vitest';
import { Decimator } from '../src/manipulation/decimator.ts';
import { spectrumKernel } from '../src/manipulation/spectrumKernel.ts';
import { expectKernelStagesMatchPlain } from './support/decimatorRuns.ts';
import { expectClose, fitTonePeak, gaussianNoise, sine } from './support/signals.ts';

// Requirement checked here, for the float64 cascade and the float32 one the spectra use (ours;
// common practice for vibration front ends): across the kept band
// 0..0.4 of the output rate the gain is flat within 0.002 dB, and anything that would fold into
// that band is at least 88 dB down. Measured: ripple 0.0006 dB, worst alias -91.1 dB.
// Gains are measured with sines: a least-squares fit of the known tone to the output after the
// filter has settled (the first quarter is dropped).

const RATE_HZ = 48_000;
type Precision = 'float64' | 'float32';

function gainDb(factor: number, freqHz: number, precision: Precision = 'float64'): number {
  const n = RATE_HZ * 2;
  const d = new Decimator(factor, { precision });
  const out = new Float32Array(Math.ceil(n / factor));
  const m = d.process(sine(n, freqHz, RATE_HZ, 1, 0.4), out);
  const y = out.subarray(Math.floor(m / 4), m);
  return 20 * Math.log10(fitTonePeak(y, freqHz, RATE_HZ / factor)); // phase of the fit is free
}

describe('Decimator', () => {
  for (const [factor, precision] of [[2, 'float64'], [8, 'float64'], [2, 'float32'], [8, 'float32'], [32, 'float32']] as const) {
    const outHz = RATE_HZ / factor;

    it(`factor ${factor}, ${precision}: passband flat within 0.002 dB up to 0.4 of the output rate`, () => {
      for (let f = 0.01 * outHz; f <= 0.4 * outHz + 1e-9; f += 0.039 * outHz) {
        expectClose(`gain at ${f.toFixed(1)} Hz (dB)`, gainDb(factor, f, precision), 0, 0.002);
      }
    });

    it(`factor ${factor}, ${precision}: sines that would alias into 0..0.4 of the output rate are at least 88 dB down`, () => {
      for (let alias = 0.02 * outHz; alias <= 0.4 * outHz; alias += 0.063 * outHz) {
        for (let m = 1; m <= factor / 2; m++) {
          for (const f of [m * outHz - alias, m * outHz + alias]) {
            if (f >= RATE_HZ / 2) continue;
            const g = gainDb(factor, f, precision);
            expect(g, `input ${f.toFixed(1)} Hz folds to ${alias.toFixed(1)} Hz: gain ${g.toFixed(1)} dB, limit -88 dB`).toBeLessThan(-88);
          }
        }
      }
    });
  }

  // A linear-phase FIR delays every passband frequency by (taps - 1) / 2 samples of its rate, so
  // a cascade by the sum of its stages' half lengths, each at its own rate: 29 (factor - 1) for
  // the 59-tap stages; for the float32 stages at factor 8 (23, 23 and 59 taps) 11 + 2 x 11 + 4 x 29.
  for (const [factor, precision, delay] of [[4, 'float64', 87], [8, 'float32', 149]] as const) {
    it(`${precision}, factor ${factor}: delays by groupDelayInputSamples = ${delay}: output m matches the input at m D + D - 1 - delay`, () => {
      const f = 300;
      const x = sine(2000 * factor, f, RATE_HZ, 1, 0.2);
      const d = new Decimator(factor, { precision });
      expect(d.groupDelayInputSamples).toBe(delay);
      const out = new Float32Array(2000);
      d.process(x, out);
      for (let m = 500; m < 2000; m += 137) {
        const t = (m * factor + factor - 1 - d.groupDelayInputSamples) / RATE_HZ;
        // 3e-4: passband ripple (0.002 dB is 2.3e-4 relative at most) plus float32 rounding.
        expectClose(`output ${m}`, out[m], Math.sin(2 * Math.PI * f * t + 0.2), 3e-4);
      }
    });
  }

  it('streams: any split of the input into blocks gives the same output as one block', () => {
    const x = gaussianNoise(5000, 1, 3);
    const whole = new Float32Array(5000);
    const nWhole = new Decimator(8).process(x, whole);
    const d = new Decimator(8);
    const parts: number[] = [];
    const out = new Float32Array(5000);
    for (const [a, b] of [[0, 1], [1, 7], [7, 8], [8, 1000], [1000, 1003], [1003, 5000]]) {
      const k = d.process(x.subarray(a, b), out);
      parts.push(...out.subarray(0, k));
      expect(d.phase).toBe(b % 8);
    }
    expect(parts.length).toBe(nWhole);
    expect(parts).toEqual(Array.from(whole.subarray(0, nWhole)));
  });

  it('one sample gives no output until `factor` samples have arrived', () => {
    const d = new Decimator(4);
    const out = new Float32Array(1);
    expect([1, 2, 3, 4].map((v) => d.process(new Float32Array([v]), out))).toEqual([0, 0, 0, 1]);
  });

  it('empty block writes nothing', () => {
    expect(new Decimator(2).process(new Float32Array(0), new Float32Array(0))).toBe(0);
  });

  it('factor 1 copies', () => {
    const x = gaussianNoise(100, 1, 1);
    const out = new Float32Array(100);
    expect(new Decimator(1).process(x, out)).toBe(100);
    expect(out).toEqual(x);
  });

  it('unit gain at DC (half-band taps sum to 1)', () => {
    const d = new Decimator(2);
    const out = new Float32Array(500);
    const n = d.process(new Float32Array(1000).fill(2.5), out);
    expectClose('settled DC output', out[n - 1], 2.5, 1e-6);
  });

  it('reset() clears the history', () => {
    const d = new Decimator(2);
    const out = new Float32Array(100);
    d.process(gaussianNoise(101, 1, 2), out);
    d.reset();
    expect(d.phase).toBe(0);
    const a = new Float32Array(50);
    const b = new Float32Array(50);
    const x = gaussianNoise(100, 1, 4);
    d.process(x, a);
    new Decimator(2).process(x, b);
    expect(a).toEqual(b);
  });

  it('the WebAssembly stages give every output bit for bit as the JavaScript stages, whatever the blocks, several decimators taking turns', () => {
    // Reference: the JavaScript cascade (kernel: false). Blocks of 1, odd, even and growing
    // lengths, a reset in the middle, factors 2 to 64, and the kernel's decimators interleaved
    // block by block (they share the kernel's work buffers; each keeps only its own history).
    expect(spectrumKernel(), 'the WebAssembly SIMD kernel loads on this Node').not.toBeNull();
    expectKernelStagesMatchPlain([2, 8, 64, 8], {}, [1, 7, 256, 3, 1000, 2, 4099, 1, 513, 20000, 5], 11);
  });

  it('rejects a non-power-of-two factor and a too-small output buffer with QB_E_DSP_ARGUMENT', () => {
    expect(() => new Decimator(3)).toThrow(/decimation factor must be a power of two from 1 to 65536, got 3/);
    expect(() => new Decimator(0)).toThrow(/got 0/);
    expect(() => new Decimator(2).process(new Float32Array(11), new Float32Array(5))).toThrow(
      /output buffer holds 5 samples, needs at least 6 for 11 inputs at factor 2/,
    );
  });
});
