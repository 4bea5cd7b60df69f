import { describe, expect, it } from 'vitest';
import { runningMedian } from '../src/manipulation/runningMedian.ts';
import { spectrumKernel } from '../src/manipulation/spectrumKernel.ts';

// Reference: the median by definition, each window copied and sorted (Array.prototype.sort),
// the mean of the two middle values for an even count.
function bruteForce(a: Float64Array, half: number, topLine: number, lastLine: number): Float64Array {
  const out = new Float64Array(topLine + 1);
  for (let i = 1; i <= topLine; i++) {
    const w: number[] = [];
    for (let j = Math.max(1, i - half); j <= Math.min(lastLine, i + half); j++) w.push(a[j]);
    w.sort((x, y) => x - y);
    const n = w.length;
    out[i] = n % 2 === 1 ? w[(n - 1) / 2] : 0.5 * (w[n / 2 - 1] + w[n / 2]);
  }
  return out;
}

function random(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    return s / 2 ** 32;
  };
}

describe.each([
  ['in the WebAssembly kernel', true],
  ['in JavaScript', false],
])('runningMedian %s', (_, useKernel) => {
  it('runs where it says', () => {
    // The kernel path needs WebAssembly SIMD, which Node 20 has.
    if (useKernel) expect(spectrumKernel()).not.toBeNull();
  });

  it('equals the sorted-window median for every line: random spectra, ties, short spectra, edges', () => {
    const u = random(5);
    for (let trial = 0; trial < 300; trial++) {
      const length = 2 + Math.floor(u() * 300);
      const a = new Float64Array(length);
      const levels = trial % 3 === 0 ? 4 : 0; // every third spectrum takes 4 values only: many ties
      for (let i = 0; i < length; i++) a[i] = levels ? Math.floor(u() * levels) : u() * (u() < 0.05 ? 100 : 1);
      const lastLine = length - 1;
      const half = 1 + Math.floor(u() * 25);
      const topLine = 1 + Math.floor(u() * lastLine);
      const got = new Float64Array(topLine + 1);
      runningMedian(a, half, topLine, lastLine, got, 1, useKernel);
      const want = bruteForce(a, half, topLine, lastLine);
      for (let i = 1; i <= topLine; i++) {
        if (!Object.is(got[i], want[i])) expect.fail(`trial ${trial} (length ${length}, half ${half}, top ${topLine}), line ${i}: got ${got[i]}, want ${want[i]}`);
      }
    }
  });

  it('extended from a later line, gives the medians of one pass from line 1 (NaN included)', () => {
    const u = random(11);
    for (let trial = 0; trial < 200; trial++) {
      const length = 10 + Math.floor(u() * 200);
      const a = new Float64Array(length);
      for (let i = 0; i < length; i++) a[i] = trial % 4 === 0 ? Math.floor(u() * 3) : u();
      if (trial % 5 === 0) a[1 + Math.floor(u() * (length - 1))] = Number.NaN;
      const lastLine = length - 1;
      const half = 1 + Math.floor(u() * 25);
      const first = 1 + Math.floor(u() * (lastLine - 1));
      const topLine = first + 1 + Math.floor(u() * (lastLine - first));
      const got = new Float64Array(topLine + 1);
      runningMedian(a, half, first, lastLine, got, 1, useKernel);
      runningMedian(a, half, topLine, lastLine, got, first + 1, useKernel);
      const want = new Float64Array(topLine + 1);
      runningMedian(a, half, topLine, lastLine, want, 1, useKernel);
      for (let i = 1; i <= topLine; i++) {
        if (!Object.is(got[i], want[i])) expect.fail(`trial ${trial} (half ${half}, ${first} then ${topLine}), line ${i}: got ${got[i]}, want ${want[i]}`);
      }
      if (trial % 5 !== 0) for (let i = 1; i <= topLine; i++) if (!Object.is(want[i], bruteForce(a, half, topLine, lastLine)[i])) expect.fail(`trial ${trial} line ${i}`);
    }
  });

  it('a window holding NaN gives what a sorted insertion gives (the plain path)', () => {
    const a = Float64Array.from([0, 3, 1, Number.NaN, 2, 5, 4, 1, 7]);
    const got = new Float64Array(9);
    runningMedian(a, 2, 8, 8, got, 1, useKernel);
    // Windows without the NaN (lines 6..8 see lines 4..8) are ordinary medians.
    expect(Array.from(got.subarray(6))).toEqual([4, 4.5, 4]);
  });
});
