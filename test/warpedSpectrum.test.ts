import { describe, expect, it } from 'vitest';
import { spectrumKernel } from '../src/manipulation/spectrumKernel.ts';
import { maxBeta, WarpedSpectrum } from '../src/manipulation/warpedSpectrum.ts';
import { gaussianNoise } from './support/signals.ts';

// A frame resampled at equal steps of shaft angle makes every order of a linearly changing speed
// a steady line. Checked against chirps whose phase is the exact integral of their frequency:
// f(tau) = fc (1 + beta tau), phase = 2 pi k fc (tau + beta tau^2 / 2).
const RATE = 640;
const T = 1.5;
const N = 1024;

/** k-th order of a chirp around the frame centre, peak 1, sampled at RATE with `extra` samples beyond each end. */
function chirp(fcHz: number, beta: number, k: number, extra = 8): { x: Float32Array; centre: number } {
  const half = Math.ceil((T / 2) * RATE) + extra;
  const x = new Float32Array(2 * half + 1);
  for (let i = 0; i < x.length; i++) {
    const tau = (i - half) / RATE;
    x[i] = Math.sin(2 * Math.PI * k * fcHz * (tau + (beta * tau * tau) / 2) + 0.3);
  }
  return { x, centre: half };
}

function peak(a: Float64Array): { line: number; value: number } {
  let line = 1;
  for (let i = 2; i < a.length; i++) if (a[i] > a[line]) line = i;
  return { line, value: a[line] };
}

describe('WarpedSpectrum', () => {
  const w = new WarpedSpectrum(N, T);

  it('puts the 5th order of a steep ramp on one line at 5 fc, at the RMS of a steady sine', () => {
    // fc 14 Hz ramping at 30 % of fc per second: 5X sweeps 31.5 Hz, 47 lines, across the frame.
    const fc = 14;
    const beta = 0.3;
    const { x, centre } = chirp(fc, beta, 5);
    const warped = peak(w.compute(x, centre, RATE, beta));
    // Place it on a line: 5 fc T = 105 lines exactly.
    expect(warped.line).toBe(Math.round(5 * fc * T));
    // A steady sine of peak 1 on a line reads 1 / sqrt(2) (amplitude-correct Hann, common
    // practice); the 4-point interpolation of a 70 Hz tone sampled at 640 Hz loses a little.
    expect(warped.value).toBeGreaterThan(0.99 / Math.SQRT2);
    expect(warped.value).toBeLessThan(1.01 / Math.SQRT2);
    // Without the warp the same frame smears it over tens of lines.
    const plain = peak(w.compute(x, centre, RATE, 0));
    expect(plain.value).toBeLessThan(0.3 / Math.SQRT2);
  });

  it('with beta 0 is the plain spectrum: a steady sine between lines is centred where it is', () => {
    const fc = 20.3; // 30.45 lines
    const { x, centre } = chirp(fc, 0, 1);
    const a = w.compute(x, centre, RATE, 0);
    const p = peak(a);
    expect(p.line).toBe(30);
    // Two-line interpolation for a Hann window, delta = (2 r - 1) / (r + 1) with r the larger
    // neighbour over the peak (from memory; exact for a lone steady sine).
    const r = a[31] / a[30];
    const c = 30 + (2 * r - 1) / (r + 1);
    expect(Math.abs(c - 30.45)).toBeLessThan(0.02);
  });

  it('a wrong slope smears the line symmetrically: its centre stays at fc', () => {
    const fc = 12; // 18 lines
    const { x, centre } = chirp(fc, 0.2, 3); // 3X at 54 lines
    const a = w.compute(x, centre, RATE, 0.1);
    let num = 0;
    let den = 0;
    for (let i = 40; i <= 68; i++) {
      num += a[i] * a[i] * i;
      den += a[i] * a[i];
    }
    expect(Math.abs(num / den - 54)).toBeLessThan(0.15);
  });

  it('keeps the model speed positive across the frame', () => {
    expect(maxBeta(T) * (T / 2)).toBeLessThan(1);
  });

  it('the WebAssembly frame gives every line bit for bit as the JavaScript loop: slopes, steady, clamped edges', () => {
    expect(spectrumKernel(), 'the WebAssembly SIMD kernel loads on this Node').not.toBeNull();
    const { x: tone } = chirp(12, 0.4, 3);
    const noise = gaussianNoise(tone.length, 1, 3);
    const src = tone.map((v, i) => v + 0.1 * noise[i]);
    const kernel = new WarpedSpectrum(N, T, src.length);
    const plain = new WarpedSpectrum(N, T, src.length, false);
    const centre = (src.length - 1) / 2;
    const cases: Array<[number, number]> = [
      [centre, 0],
      [centre + 0.37, 0.4],
      [centre - 3.2, -0.9 * maxBeta(T)],
      [centre, 0.9 * maxBeta(T)],
      [centre + 40, 0.2], // the frame runs past the source's end: indices clamped
      [centre - 55.5, -0.3], // and past its start
    ];
    for (const [c, beta] of cases) {
      const a = kernel.compute(src, c, RATE, beta).slice();
      const b = plain.compute(src, c, RATE, beta);
      for (let k = 0; k < b.length; k++) {
        if (!Object.is(a[k], b[k])) expect.fail(`centre ${c}, beta ${beta}, line ${k}: kernel ${a[k]}, JavaScript ${b[k]}`);
      }
    }
  });

  it('asked for fewer lines, gives those lines bit for bit and zeros above', () => {
    const { x } = chirp(12, 0.4, 3);
    const all = new WarpedSpectrum(N, T, x.length);
    const some = new WarpedSpectrum(N, T, x.length, true, 100);
    expect(some.lines).toBe(100);
    for (const beta of [0, 0.3, -0.5]) {
      const a = all.compute(x, (x.length - 1) / 2, RATE, beta);
      const b = some.compute(x, (x.length - 1) / 2, RATE, beta);
      expect(b.length).toBe(a.length);
      for (let k = 0; k < a.length; k++) if (!Object.is(b[k], k < 100 ? a[k] : 0)) expect.fail(`beta ${beta}, line ${k}: ${b[k]} against ${a[k]}`);
    }
  });
});
