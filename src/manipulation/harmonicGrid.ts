/**
 * The harmonic sum of the tachless speed estimate (speedFromSpectrum.ts, step 2) and its search
 * over a grid of candidate fundamentals.
 *
 * score(f) = sum_{k=1..H} w_k c(k f / binHz), c linearly interpolated between lines, harmonics
 * at or beyond `topLine` left out, w_1 = FUNDAMENTAL_WEIGHT and the others 1.
 *
 * The grid search skips blocks of BLOCK candidates that cannot beat what has been found: c is
 * never below 0, and an interpolated value never exceeds the larger of its two lines, so for a
 * block whose harmonic k reaches lines i0..i1, sum_k w_k max(c[i0..i1 + 1]) bounds every score
 * in it (plus BOUND_SLACK for rounding). The block with the highest bound is scored first, then
 * the rest in order; the answer is exactly that of scoring every candidate (first candidate of
 * the highest score), at a fraction of the work.
 */

/** Weight of the candidate's own line in its score (harmonics weigh 1). */
export const FUNDAMENTAL_WEIGHT = 2;
/** Candidates per block of the bound. */
const BLOCK = 8;
/** Rounding allowance of the bound: interpolation and sums of values of at most 6, a few ulps each. */
const BOUND_SLACK = 1e-9;

export interface HarmonicGrid {
  fMinHz: number;
  fMaxHz: number;
  stepHz: number;
  /** Candidates 0..steps; the last is fMaxHz. */
  steps: number;
  binHz: number;
  harmonics: number;
  topLine: number;
}

export function gridHz(g: HarmonicGrid, j: number): number {
  return j === g.steps ? g.fMaxHz : g.fMinHz + j * g.stepHz;
}

export function harmonicScore(g: HarmonicGrid, fHz: number, c: Float64Array): number {
  const { binHz, harmonics: h, topLine } = g;
  let s = 0;
  for (let k = 1; k <= h; k++) {
    const x = (k * fHz) / binHz;
    if (x >= topLine) break;
    const i = Math.floor(x);
    s += (k === 1 ? FUNDAMENTAL_WEIGHT : 1) * (c[i] + (x - i) * (c[i + 1] - c[i]));
  }
  return s;
}

let bounds = new Float64Array(64);

/** Upper bound of the scores of candidates j0..j1 (see the file's comment). */
function blockBound(g: HarmonicGrid, j0: number, j1: number, c: Float64Array): number {
  const { binHz, harmonics: h, topLine } = g;
  const fLo = gridHz(g, j0);
  const fHi = gridHz(g, j1);
  let b = 0;
  for (let k = 1; k <= h; k++) {
    const xLo = (k * fLo) / binHz;
    if (xLo >= topLine) break;
    const i1 = Math.min(topLine, Math.floor((k * fHi) / binHz) + 1);
    let m = 0;
    for (let i = Math.floor(xLo); i <= i1; i++) if (c[i] > m) m = c[i];
    b += (k === 1 ? FUNDAMENTAL_WEIGHT : 1) * m;
  }
  return b + BOUND_SLACK;
}

/** Bounds of every block; returns the index of the block with the highest. */
function blockBounds(g: HarmonicGrid, c: Float64Array): number {
  const blocks = Math.floor(g.steps / BLOCK) + 1;
  if (bounds.length < blocks) bounds = new Float64Array(2 * blocks);
  let top = 0;
  for (let b = 0; b < blocks; b++) {
    bounds[b] = blockBound(g, b * BLOCK, Math.min(g.steps, b * BLOCK + BLOCK - 1), c);
    if (bounds[b] > bounds[top]) top = b;
  }
  return top;
}

/** The first candidate of the highest score, and that score, as scoring them all in order gives. */
export function gridBest(g: HarmonicGrid, c: Float64Array): { fHz: number; score: number } {
  const top = blockBounds(g, c);
  const blocks = Math.floor(g.steps / BLOCK) + 1;
  let bestJ = -1;
  let best = -1;
  // The block of the highest bound first (b = -1 stands for it), then the others in order.
  for (let b = -1; b < blocks; b++) {
    const block = b < 0 ? top : b;
    if (b === top || (b >= 0 && bounds[b] < best)) continue;
    const end = Math.min(g.steps, block * BLOCK + BLOCK - 1);
    for (let j = block * BLOCK; j <= end; j++) {
      const s = harmonicScore(g, gridHz(g, j), c);
      if (s > best || (s === best && j < bestJ)) {
        best = s;
        bestJ = j;
      }
    }
  }
  return { fHz: gridHz(g, bestJ), score: best };
}

/** The highest score on the grid (0 when every score is 0). */
export function gridMax(g: HarmonicGrid, c: Float64Array): number {
  const top = blockBounds(g, c);
  const blocks = Math.floor(g.steps / BLOCK) + 1;
  let best = 0;
  for (let b = -1; b < blocks; b++) {
    const block = b < 0 ? top : b;
    if (b === top || (b >= 0 && !(bounds[b] > best))) continue;
    const end = Math.min(g.steps, block * BLOCK + BLOCK - 1);
    for (let j = block * BLOCK; j <= end; j++) best = Math.max(best, harmonicScore(g, gridHz(g, j), c));
  }
  return best;
}
