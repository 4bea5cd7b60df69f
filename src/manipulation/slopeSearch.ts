/**
 * The tachless tracker's search for the warp slope of a frame (tachlessTracker.ts, step 3): the
 * frames at beta0 + m step are scored by the sharpness of their harmonic comb, the search climbs
 * on while the best lies at an end, and the peak is refined by a parabola.
 */
import type { SpectralSpeed } from './speedFromSpectrum.ts';

/** A frame's estimate at one warp slope, and the height of its harmonic comb. */
export interface Trial {
  beta: number;
  est: SpectralSpeed;
  comb: number;
}

/** Most steps the slope search climbs past the end of its first points. */
const MAX_CLIMBS = 6;

export function clampBeta(beta: number, betaMax: number): number {
  return Math.max(-betaMax, Math.min(betaMax, beta));
}

/**
 * Scores beta0 + m step for m = -half..half (each clamped to +-betaMax) with `trialAt`; while the
 * best lies at an end of what was scored, climbs on past it in steps that double (the slope
 * changed faster than the track followed, at the start or end of a ramp). Refines the best by a
 * parabola through it and its two neighbours, and returns the better of the refined and the best
 * trial.
 */
export function searchSlope(trialAt: (beta: number) => Trial, betaMax: number, beta0: number, step: number, half: number): Trial {
  const trials: Trial[] = [];
  for (let m = -half; m <= half; m++) trials.push(trialAt(clampBeta(beta0 + m * step, betaMax)));
  let bi = indexOfBest(trials);
  let climbStep = step;
  for (let climbs = 0; climbs < MAX_CLIMBS && (bi === 0 || bi === trials.length - 1) && trials[bi].comb > 0; climbs++) {
    const up = bi === trials.length - 1;
    const beta = clampBeta(trials[bi].beta + (up ? climbStep : -climbStep), betaMax);
    if (beta === trials[bi].beta) break;
    const t = trialAt(beta);
    if (up) trials.push(t);
    else trials.unshift(t);
    bi = indexOfBest(trials);
    climbStep *= 2;
  }
  if (bi === 0 || bi === trials.length - 1 || trials[bi].comb === 0) return trials[bi];
  const [p, q, r] = [trials[bi - 1], trials[bi], trials[bi + 1]];
  // Vertex of the parabola through three points (x = beta, y = comb), spacing not equal.
  const d1 = (q.comb - p.comb) / (q.beta - p.beta);
  const d2 = (r.comb - q.comb) / (r.beta - q.beta);
  const curv = (d2 - d1) / (r.beta - p.beta);
  if (!(curv < 0)) return q;
  const vertex = (p.beta + q.beta) / 2 - d1 / (2 * curv);
  const refined = trialAt(clampBeta(Math.min(r.beta, Math.max(p.beta, vertex)), betaMax));
  return refined.comb >= q.comb ? refined : q;
}

function indexOfBest(trials: Trial[]): number {
  let bi = 0;
  for (let i = 1; i < trials.length; i++) if (trials[i].comb > trials[bi].comb) bi = i;
  return bi;
}
