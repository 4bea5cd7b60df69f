import { describe, expect, it } from 'vitest';
import { combSharpness } from '../src/manipulation/combSharpness.ts';
import { SeededRandom } from '../src/simulation/prng.ts';

// Reference: the score written out from its definition, the floor as the upper median of a
// sorted copy of the lines around each harmonic (Array.prototype.sort).
function reference(a: Float64Array, f1: number, harmonics: number): number {
  let score = 0;
  for (let k = 1; k <= harmonics; k++) {
    const c = Math.round(k * f1);
    if (c - 4 < 1 || c + 4 >= a.length) break;
    const peak = Math.max(a[c - 1], a[c], a[c + 1]);
    let local = 0;
    for (let j = c - 4; j <= c + 4; j++) local += a[j] * a[j];
    const around = Array.from(a.subarray(Math.max(1, c - 12), Math.min(a.length - 1, c + 12) + 1)).sort((x, y) => x - y);
    const floor = around[around.length >> 1];
    const weight = floor > 0 ? Math.min(1, Math.max(0, Math.log2(peak / floor) - 1) / 3) : 1;
    if (local > 0) score += (weight * peak * peak) / local;
  }
  return score;
}

/** Deterministic uniform numbers in [0, 1), so a failure can be replayed. */
function random(seed: number): () => number {
  const r = new SeededRandom(seed);
  return () => r.uniform();
}

describe('combSharpness', () => {
  it('gives the score of its definition bit for bit: lines clear of the floor, buried, in between, ties, zeros, NaN, edges', () => {
    const u = random(7);
    let weighed = 0;
    for (let trial = 0; trial < 3000; trial++) {
      const length = 20 + Math.floor(u() * 200);
      const a = new Float64Array(length);
      const kind = trial % 6;
      for (let i = 0; i < length; i++) a[i] = kind === 0 ? Math.floor(u() * 4) / 2 : kind === 1 && u() < 0.3 ? 0 : u();
      const f1 = 3 + u() * 30;
      // Harmonic lines from buried (x0.5) to far above the floor (x100), the ratios near 2 and 16 included.
      const heights = [0.5, 1.9, 2, 2.1, 4, 15.9, 16, 16.1, 100];
      for (let k = 1; k * f1 < length - 1; k++) a[Math.round(k * f1)] = 0.5 * heights[Math.floor(u() * heights.length)] * (kind === 0 || kind === 2 ? 1 : 1 + u());
      if (kind === 3) a[1 + Math.floor(u() * (length - 1))] = Number.NaN;
      if (kind === 4) a[1 + Math.floor(u() * (length - 1))] = Number.POSITIVE_INFINITY;
      const h = 1 + Math.floor(u() * 6);
      const got = combSharpness(a, f1, h);
      const want = reference(a, f1, h);
      if (!Object.is(got, want)) expect.fail(`trial ${trial} (length ${length}, f1 ${f1}, H ${h}): got ${got}, want ${want}`);
      if (want > 0) weighed++;
    }
    expect(weighed).toBeGreaterThan(1000);
  });
});
