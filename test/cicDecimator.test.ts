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

  it('gives the same outputs however the input is cut into blocks, and starts from zeros after a reset', () => {
    // Reference: the whole signal in one block; each output is also the triangle's weighted sum
    // written out here (zeros before the first input), checked on a few outputs.
    const x = new Float32Array(5000).map((_, i) => Math.sin(i * 0.37) + ((i * 7919) % 13) / 13);
    const whole = new Float32Array(Math.ceil(x.length / R));
    const m = new CicDecimator(R).process(x, whole);
    const tri = (j: number): number => (R - Math.abs(j - (R - 1))) / (R * R);
    for (const k of [0, 1, 57, m - 1]) {
      const last = k * R + R - 1;
      let acc = 0;
      for (let j = 0; j < 2 * R - 1; j++) {
        const at = last - (2 * R - 2) + j;
        acc += tri(j) * (at >= 0 ? x[at] : 0);
      }
      expect(whole[k], `output ${k}`).toBeCloseTo(acc, 6);
    }
    const d = new CicDecimator(R);
    d.process(x.subarray(0, 77), new Float32Array(100));
    d.reset();
    for (const cuts of [[1, 2, 3, 997, 4000], [R - 1, 1, 2 * R + 1, 4996 - 3 * R]]) {
      d.reset();
      const got: number[] = [];
      let at = 0;
      for (const len of [...cuts, x.length]) {
        const piece = x.subarray(at, Math.min(x.length, at + len));
        at += piece.length;
        const out = new Float32Array(Math.ceil(piece.length / R) + 1);
        const w = d.process(piece, out);
        got.push(...out.subarray(0, w));
        if (at >= x.length) break;
      }
      expect(got.length, `blocks ${cuts.join(', ')}`).toBe(m);
      for (let k = 0; k < m; k++) if (!Object.is(got[k], whole[k])) expect.fail(`blocks ${cuts.join(', ')}, output ${k}: ${got[k]} against ${whole[k]}`);
    }
  });

  it('gives, bit for bit, the triangle sum taken tap by tap in order for every output (any factor, any blocks, kernel or not)', () => {
    // Reference: each output summed alone, oldest input first, in float64, then stored as float32.
    for (const r of [2, 4, 16, 32]) {
      const x = new Float32Array(20_000).map((_, i) => Math.sin(i * 0.013 * r) + ((i * 7919) % 101) / 101 - 0.5);
      const taps = Array.from({ length: 2 * r - 1 }, (_, j) => (r - Math.abs(j - (r - 1))) / (r * r));
      const want: number[] = [];
      for (let last = r - 1; last < x.length; last += r) {
        let acc = 0;
        for (let j = 0; j < 2 * r - 1; j++) {
          const at = last - (2 * r - 2) + j;
          acc += taps[j] * (at >= 0 ? x[at] : 0);
        }
        want.push(Math.fround(acc));
      }
      // In the WebAssembly kernel (pieces longer than it takes at once included) and in JavaScript.
      for (const useKernel of [true, false]) {
        const d = new CicDecimator(r, useKernel);
        const got: number[] = [];
        for (let at = 0, b = 0; at < x.length; b++) {
          const piece = x.subarray(at, Math.min(x.length, at + [8192, 1, 3 * r + 5, 100 * r - 1, 777, 9000][b % 6]));
          at += piece.length;
          const out = new Float32Array(Math.ceil(piece.length / r) + 1);
          got.push(...out.subarray(0, d.process(piece, out)));
        }
        const what = `factor ${r}, ${useKernel ? 'kernel' : 'JavaScript'}`;
        expect(got.length, what).toBe(want.length);
        for (let k = 0; k < want.length; k++) if (!Object.is(got[k], want[k])) expect.fail(`${what}, output ${k}: ${got[k]} against ${want[k]}`);
      }
    }
  });
});
