/**
 * Test signals and checks shared by the spectrum tests: seeded noise, sines, least-squares tone
 * fits, and a comparison that prints input, expected, actual and tolerance when it fails.
 */
import { expect } from 'vitest';
import { SeededRandom } from '../../src/simulation/prng.ts';

/** Seeded uniform generator in [0, 1) (the simulator's), so every run sees the same data. */
export function uniform(seed: number): () => number {
  const r = new SeededRandom(seed);
  return () => r.uniform();
}

/** Seeded standard normal samples (Box-Muller). */
export function gaussianNoise(n: number, sigma: number, seed: number): Float32Array {
  const u = uniform(seed);
  const x = new Float32Array(n);
  for (let i = 0; i < n; i += 2) {
    const r = Math.sqrt(-2 * Math.log(1 - u()));
    const th = 2 * Math.PI * u();
    x[i] = sigma * r * Math.cos(th);
    if (i + 1 < n) x[i + 1] = sigma * r * Math.sin(th);
  }
  return x;
}

/** A sin(2 pi f t + phase) sampled at rateHz, n samples from t = 0. */
export function sine(n: number, freqHz: number, rateHz: number, peak: number, phase = 0): Float32Array {
  const x = new Float32Array(n);
  for (let i = 0; i < n; i++) x[i] = peak * Math.sin((2 * Math.PI * freqHz * i) / rateHz + phase);
  return x;
}

/** Peak amplitude of the tone at freqHz in y, by a least-squares fit of sin, cos and offset. */
export function fitTonePeak(y: Float32Array, freqHz: number, rateHz: number): number {
  let ss = 0, sc = 0, cc = 0, ys = 0, yc = 0;
  for (let i = 0; i < y.length; i++) {
    const th = (2 * Math.PI * freqHz * i) / rateHz;
    const s = Math.sin(th);
    const c = Math.cos(th);
    ss += s * s;
    sc += s * c;
    cc += c * c;
    ys += y[i] * s;
    yc += y[i] * c;
  }
  const det = ss * cc - sc * sc;
  const a = (ys * cc - yc * sc) / det;
  const b = (yc * ss - ys * sc) / det;
  return Math.hypot(a, b);
}

/** Checks |actual - expected| <= tol; on failure the message names the case and all four values. */
export function expectClose(what: string, actual: number, expected: number, tol: number): void {
  const ok = Math.abs(actual - expected) <= tol;
  expect(ok, `${what}: expected ${expected}, actual ${actual}, tolerance ${tol} (off by ${actual - expected})`).toBe(true);
}

/** Relative version of expectClose: |actual / expected - 1| <= rel. */
export function expectRelClose(what: string, actual: number, expected: number, rel: number): void {
  const ok = Math.abs(actual / expected - 1) <= rel;
  expect(ok, `${what}: expected ${expected}, actual ${actual}, relative tolerance ${rel} (off by ${actual / expected - 1})`).toBe(true);
}
