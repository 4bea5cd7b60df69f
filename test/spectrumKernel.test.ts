import { readFileSync } from 'node:fs';
import FFT from 'fft.js';
import { describe, expect, it } from 'vitest';
import { compileKernel } from '../scripts/compileKernel.ts';
import { frameMean, removeMeanAndWindow, updateAverage } from '../src/manipulation/frameKernels.ts';
import { hannWindow } from '../src/manipulation/hannWindow.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { RollingSpectrum } from '../src/manipulation/rollingSpectrum.ts';
import { spectrumKernel } from '../src/manipulation/spectrumKernel.ts';
import { HALF_BAND_KERNEL_WASM_BASE64 } from '../src/manipulation/halfBandKernelWasm.ts';
import { SPECTRUM_KERNEL_WASM_BASE64 } from '../src/manipulation/spectrumKernelWasm.ts';
import { gaussianNoise, sine } from './support/signals.ts';

describe('spectrum kernel (WebAssembly SIMD)', () => {
  for (const [name, committed] of [
    ['spectrumKernel', SPECTRUM_KERNEL_WASM_BASE64],
    ['halfBandKernel', HALF_BAND_KERNEL_WASM_BASE64],
  ] as const) {
    it(`is the committed compilation of ${name}.wat`, async () => {
      const wat = readFileSync(new URL(`../src/manipulation/${name}.wat`, import.meta.url), 'utf8');
      const bytes = await compileKernel(wat);
      expect(Buffer.from(bytes).toString('base64')).toBe(committed);
    });
  }

  it('computes bit for bit what the JavaScript kernels compute, NaN included', async () => {
    const k = spectrumKernel();
    expect(k).not.toBeNull();
    if (k === null) return;
    const n = 1024;
    const half = n / 2;
    const lines = half + 1;
    const w = hannWindow(n).w;
    const fft = await createRealFft(n, 'pffft');
    const p = { frame: k.alloc(4 * n), w: k.alloc(4 * n), out: k.alloc(4 * n), ord: k.alloc(4 * n), sum: k.alloc(8 * lines), leave: k.alloc(8 * lines), amp: k.alloc(8 * lines), pow: k.alloc(8 * lines) };
    const jsSum = new Float64Array(lines);
    const jsLeave = new Float64Array(lines);
    k.f64(p.sum, lines).fill(0);
    k.f64(p.leave, lines).fill(0);
    k.f32(p.w, n).set(w);
    for (let trial = 0; trial < 6; trial++) {
      const x = gaussianNoise(n, 0.5 + trial, 11 + trial);
      for (let i = 0; i < n; i++) x[i] += 3 + Math.sin(i / (3 + trial));
      if (trial === 4) x[17] = Number.NaN;
      k.f32(p.frame, n).set(x);
      const mean = k.fn.meanWindow(p.frame, p.w, p.out, n);
      const jsMean = frameMean(x);
      const jsOut = new Float32Array(n);
      removeMeanAndWindow(x, jsMean, w, jsOut);
      expect(Object.is(mean, jsMean) || mean === jsMean).toBe(true);
      expect(Array.from(k.f32(p.out, n))).toEqual(Array.from(jsOut));
      // Powers and the average from one ordered transform.
      fft.orderedTransform?.(jsOut, k.f32(p.ord, n));
      const jsPower = new Float64Array(lines);
      fft.powerSpectrum(jsOut, jsPower);
      const ordCopy = k.f32(p.ord, n).slice();
      k.fn.power(p.ord, p.pow, half);
      expect(Array.from(k.f64(p.pow, lines))).toEqual(Array.from(jsPower));
      k.f32(p.ord, n).set(ordCopy);
      const jsAmp = new Float64Array(lines);
      updateAverage(jsSum, jsLeave, jsPower, 3e-6, 0.25, jsAmp);
      k.fn.powerAverage(p.ord, p.sum, p.leave, p.amp, 3e-6 * 0.25, half);
      expect(Array.from(k.f64(p.amp, lines))).toEqual(Array.from(jsAmp));
      expect(Array.from(k.f64(p.sum, lines))).toEqual(Array.from(jsSum));
    }
  });

  it('keeps float32 amplitudes within 1e-5 of a float64 reference (fft.js on float64 samples)', async () => {
    // Reference: fft.js (general-purpose FFT) in float64 on the same samples, the periodic Hann
    // window w_i = 0.5 - 0.5 cos(2 pi i / N) (window tables, common practice) and the same
    // amplitude-correct scaling a_k = sqrt(c_k Pbar_k) / sum(w). Tolerance: 1e-5 of the largest line
    // (float32 carries about 7 digits; 8192-point sums lose about two).
    const n = 8192;
    const fs = 25600;
    const x = gaussianNoise(3 * n, 0.2, 5);
    const s = sine(3 * n, 1000.3, fs, 2);
    for (let i = 0; i < x.length; i++) x[i] += s[i] + 0.7;
    const rs = new RollingSpectrum({ inputRateHz: fs, frameSize: n, overlap: 0.5, averages: 4, decimation: 1, fft: await createRealFft(n, 'pffft') });
    const frames = rs.push(x, 0);
    const last = frames.at(-1);
    expect(last?.averagedFrames).toBe(4);
    const ref = new FFT(n);
    const out = ref.createComplexArray() as number[];
    const lines = n / 2 + 1;
    const pbar = new Float64Array(lines);
    let wsum = 0;
    const win = new Float64Array(n);
    for (let i = 0; i < n; i++) wsum += win[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
    for (let f = 1; f <= 4; f++) {
      const seg = Array.from(x.subarray(f * (n / 2), f * (n / 2) + n), Number);
      const mean = seg.reduce((a, v) => a + v, 0) / n;
      ref.realTransform(out, seg.map((v, i) => (v - mean) * win[i]));
      for (let kk = 0; kk < lines; kk++) pbar[kk] += (out[2 * kk] ** 2 + out[2 * kk + 1] ** 2) / 4;
    }
    let peak = 0;
    let worst = 0;
    for (let kk = 0; kk < lines; kk++) {
      const a = Math.sqrt((kk === 0 || kk === n / 2 ? 1 : 2) * pbar[kk]) / wsum;
      peak = Math.max(peak, a);
      worst = Math.max(worst, Math.abs(a - (last as { amplitude: Float64Array }).amplitude[kk]));
    }
    expect(peak).toBeGreaterThan(1);
    expect(worst).toBeLessThan(1e-5 * peak);
  });
});

describe('spectrum arrays without the WebAssembly kernel', () => {
  it('give the same frames with the JavaScript kernels as with the WebAssembly one', async () => {
    const { SpectrumArrays } = await import('../src/manipulation/spectrumArrays.ts');
    const n = 512;
    const lines = n / 2 + 1;
    const win = hannWindow(n);
    const fft = await createRealFft(n, 'pffft');
    const withKernel = new SpectrumArrays(n, 3, win.w, fft);
    const plain = new SpectrumArrays(n, 3, win.w, fft, null);
    const scale = 2 / (win.sum * win.sum);
    for (let f = 0; f < 7; f++) {
      const x = gaussianNoise(n, 1, 40 + f);
      for (const a of [withKernel, plain]) {
        a.refresh();
        a.frame.set(x);
        a.transformFrame();
      }
      const outK = new Float64Array(lines);
      const outP = new Float64Array(lines);
      withKernel.averageInto(f % 3, scale, 1 / Math.min(f + 1, 3), outK);
      plain.averageInto(f % 3, scale, 1 / Math.min(f + 1, 3), outP);
      expect(Array.from(outP)).toEqual(Array.from(outK));
    }
  });
});

describe('rolling spectra rebuilt many times', () => {
  it('reuse the kernel memory of disposed ones instead of growing it', async () => {
    const k = spectrumKernel();
    if (k === null) return;
    const fft = await createRealFft(8192, 'pffft');
    const make = () => new RollingSpectrum({ inputRateHz: 25600, frameSize: 8192, overlap: 0.5, averages: 4, decimation: 1, fft });
    make().dispose();
    const before = k.memory.buffer.byteLength;
    // 200 rebuilds of 230 kB each would add about 46 MB if nothing were reused.
    for (let i = 0; i < 200; i++) {
      const rs = make();
      rs.push(gaussianNoise(8192, 1, i), 0);
      rs.dispose();
    }
    expect(k.memory.buffer.byteLength).toBe(before);
  });
});
