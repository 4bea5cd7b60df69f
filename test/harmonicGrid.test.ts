import { describe, expect, it } from 'vitest';
import { FUNDAMENTAL_WEIGHT, gridBest, gridHz, gridMax, harmonicScore, type HarmonicGrid } from '../src/manipulation/harmonicGrid.ts';
import { SeededRandom } from '../src/simulation/prng.ts';

// The grid search skips blocks of candidates by an upper bound and claims the answer of scoring
// every candidate in order. Checked here against that plain scan, written out again from the
// definition in harmonicGrid.ts's head (score(f) = sum_k w_k c(k f / binHz), c interpolated
// between lines, harmonics at or past topLine left out), on spectra made to be hard for a bound:
// sparse spikes, plateaus, ties, harmonics cut by the top line.

function score(g: HarmonicGrid, fHz: number, c: Float64Array): number {
  let s = 0;
  for (let k = 1; k <= g.harmonics; k++) {
    const x = (k * fHz) / g.binHz;
    if (x >= g.topLine) break;
    const i = Math.floor(x);
    s += (k === 1 ? FUNDAMENTAL_WEIGHT : 1) * (c[i] + (x - i) * (c[i + 1] - c[i]));
  }
  return s;
}

/** Every candidate scored in order: the first of the highest score, and the highest (at least 0). */
function scan(g: HarmonicGrid, c: Float64Array): { j: number; best: number; max: number } {
  let j = -1;
  let best = -1;
  for (let n = 0; n <= g.steps; n++) {
    const s = score(g, gridHz(g, n), c);
    if (s > best) [best, j] = [s, n];
  }
  return { j, best, max: Math.max(0, best) };
}

/** A grid as the tachless estimate builds one: steps of binHz / (4 h) over the range. */
function grid(fMinHz: number, fMaxHz: number, binHz: number, harmonics: number, lines: number): HarmonicGrid {
  const stepHz = binHz / (4 * harmonics);
  const steps = Math.max(1, Math.ceil((fMaxHz - fMinHz) / stepHz));
  const topLine = Math.min(lines - 2, Math.ceil((harmonics * fMaxHz) / binHz) + 2);
  return { fMinHz, fMaxHz, stepHz, steps, binHz, harmonics, topLine };
}

/** Contributions of `lines` lines: mostly 0, some spikes up to 6 (the estimate's cap), some plateaus. */
function spectrum(random: SeededRandom, lines: number, kind: 'spikes' | 'plateaus' | 'dense'): Float64Array {
  const c = new Float64Array(lines);
  for (let i = 1; i < lines; i++) {
    const u = random.uniform();
    if (kind === 'dense') c[i] = 6 * u;
    else if (kind === 'spikes') c[i] = u < 0.06 ? 6 * random.uniform() : 0;
    else c[i] = u < 0.15 ? 3 : u < 0.2 ? 1.5 : 0;
  }
  return c;
}

describe('harmonicScore', () => {
  it('sums the lines at the harmonics, the fundamental twice, interpolating between lines', () => {
    // Worked by hand: 0.5 Hz lines, 10 Hz puts harmonics 1..3 on lines 20, 40, 60.
    const c = new Float64Array(100);
    c[20] = 1;
    c[40] = 0.5;
    c[60] = 0.25;
    const g = grid(5, 20, 0.5, 3, 100);
    expect(harmonicScore(g, 10, c)).toBe(2 * 1 + 0.5 + 0.25);
    // 10.25 Hz: line 20.5 (half of line 20), 41 and 61.5 hold nothing.
    expect(harmonicScore(g, 10.25, c)).toBe(2 * 0.5);
    // A harmonic at or past the top line is left out: 3 x 10 Hz lands on 60.
    expect(harmonicScore({ ...g, topLine: 60 }, 10, c)).toBe(2 * 1 + 0.5);
  });
});

describe('gridBest and gridMax', () => {
  it('give the plain scan of every candidate on random spectra and grids', () => {
    const random = new SeededRandom(4711);
    let cases = 0;
    for (const kind of ['spikes', 'plateaus', 'dense'] as const) {
      for (let n = 0; n < 150; n++) {
        const lines = 64 + Math.floor(random.uniform() * 400);
        const binHz = 0.25 + random.uniform();
        const harmonics = 1 + Math.floor(random.uniform() * 8);
        const fMinHz = binHz * (1 + random.uniform() * 10);
        const fMaxHz = fMinHz + binHz * (0.1 + random.uniform() * 40);
        const g = grid(fMinHz, fMaxHz, binHz, harmonics, lines);
        if (g.topLine < 2) continue;
        const c = spectrum(random, lines, kind);
        const want = scan(g, c);
        const got = gridBest(g, c);
        expect([got.fHz, got.score]).toEqual([gridHz(g, want.j), want.best]);
        expect(gridMax(g, c)).toBe(want.max);
        cases++;
      }
    }
    expect(cases).toBeGreaterThan(400);
  });

  it('take the first candidate of a tie, and 0 for a spectrum of nothing', () => {
    const lines = 300;
    // 1 Hz lines and 4 harmonics: steps of 1/16 Hz, every candidate below exact in binary.
    const g = grid(3, 9, 1, 4, lines);
    const zero = new Float64Array(lines);
    expect(gridBest(g, zero)).toEqual({ fHz: g.fMinHz, score: 0 });
    expect(gridMax(g, zero)).toBe(0);
    // One spike on line 24, reached by 6 Hz (its 4th harmonic) and by 8 Hz (its 3rd) alone: a
    // tie of 4 each, the first wins.
    const c = new Float64Array(lines);
    c[24] = 4;
    const want = scan(g, c);
    expect(want.best).toBe(4);
    expect(gridHz(g, want.j)).toBe(6);
    expect(gridBest(g, c)).toEqual({ fHz: 6, score: 4 });
    expect(gridMax(g, c)).toBe(4);
  });

  it('find a lone candidate at the far end of the range', () => {
    // Only the last candidate (fMaxHz itself) reaches the spike with its fundamental.
    const lines = 200;
    const g = grid(2, 12.3, 0.5, 2, lines);
    const c = new Float64Array(lines);
    const line = 12.3 / 0.5;
    c[Math.floor(line)] = 0;
    c[Math.floor(line) + 1] = 5;
    const want = scan(g, c);
    expect(want.j).toBe(g.steps);
    expect(gridBest(g, c)).toEqual({ fHz: 12.3, score: want.best });
    expect(gridMax(g, c)).toBe(want.best);
  });
});
