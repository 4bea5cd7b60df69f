/**
 * Tachless shaft speed: finds the 1X line of a vibration spectrum inside the operating range.
 *
 * Input: single-sided RMS amplitude per line of a Hann-windowed spectrum (line k at k * binHz),
 * as RollingSpectrum emits it.
 *
 * Method
 * 1. Line strength over a local noise floor. The floor at line i is the median amplitude of
 *    lines i - FLOOR_HALF_LINES .. i + FLOOR_HALF_LINES; a few lines in the window do not move a
 *    median. Strength s_i = log2(a_i / floor_i); its score contribution is
 *    c_i = clamp(s_i - 1, 0, CAP), so lines less than 2x the floor (6 dB) add nothing and one
 *    huge line cannot outweigh a family of moderate ones by more than CAP.
 * 2. Harmonic sum. For candidate fundamentals f on a grid from min to max of the range with
 *    step binHz / (4 H), score(f) = sum_{k=1..H} w_k c(k f / binHz), c linearly interpolated
 *    between lines, so the k-th harmonic of a grid point is never more than binHz / 8 off.
 *    w_1 = FUNDAMENTAL_WEIGHT, other w_k = 1: machine vibration nearly always carries some 1X
 *    (residual unbalance), so a family with its own fundamental line is the better shaft
 *    candidate than one built only of bearing or structural lines (common practice).
 * 3. Family resolution. The best-scoring f* may be 2X or 3X (a strong 2X of misalignment, a
 *    vane pass) or a subharmonic of the true 1X (it collects the 1X's harmonics at its even
 *    multiples). Members f* / m (m = 2..H) and f* n (n = 2..H) inside the range are examined,
 *    and 1X is the lowest member that (a) shows its own line, a local maximum at least
 *    SUPPORT_RATIO times the floor within one line of where it should be, (b) scores at
 *    least FAMILY_SCORE_FRACTION of f*, and (c) for f* / m with m >= 3, shows a second line at a
 *    harmonic that is not one of f*'s (a lone line at a third of f* is too often chance), and
 *    (d) after refinement (step 4) still has f* as its m-th harmonic within one line. So a weak 1X under a strong 2X wins as long as it stands
 *    above the noise, and a subharmonic candidate whose own line is missing loses to its
 *    double. When f* / 2 is in range and shows its line, a real 0.5X vibration (rub, looseness)
 *    cannot be told from a 1X with a dominant 2X: we take the lower one (a line at exactly half
 *    of a strong line is usually the shaft), and say so in `reason`.
 * 4. Refinement. Each supported harmonic's frequency is interpolated for the Hann window
 *    (three-line estimator below), then 1X is the weighted least-squares fit f_k = k f1 with
 *    weights k^2 min(ratio, RATIO_CAP)^2 (the k-th harmonic divides its frequency error by k;
 *    the ratio cap keeps one strong line that merely coincides from dominating). Harmonics
 *    farther than HARMONIC_TOL_LINES from k f1 are left out, which drops a coincident line
 *    such as a mains harmonic beside the 2X or 4X of a 4-pole motor near synchronous speed,
 *    once it sits more than half a line away (closer than that the two are one line).
 * 5. Confidence = strength x uniqueness.
 *    strength = (1 - exp(-sum of supported c_k / STRENGTH_SCALE)), halved for a lone line with
 *    no harmonic support; uniqueness = 1 - (r)^2 with r = (best score left once the chosen
 *    family's lines are removed) / (score of the chosen 1X): scores add log ratios, so a
 *    rival at half the score is already a clear second. Two unrelated families of equal weight give ~0;
 *    a noise-only spectrum gives no supported line at all (rpm null) or a low strength.
 *
 * Resolution it needs: binHz <= min 1X / MIN_LINES_TO_1X (1X at least 8 lines from DC, else the
 * window's DC leakage and the floor estimate fail; refused with a reason). Accuracy: a clean
 * 1X alone is interpolated to a few hundredths of a line; with noise and neighbouring lines
 * expect about 0.1 line, divided by k for each harmonic that joins the fit. For +-0.5 % at a
 * 1X of 30 Hz (0.15 Hz), binHz <= 0.4 Hz works on real machine recordings (see the tests);
 * separating 2X from a mains line 0.13 Hz away would need about 0.05 Hz.
 */

import { gridBest, gridMax, harmonicScore, type HarmonicGrid } from './harmonicGrid.ts';
import { NamedSpeed, type SpectralSpeed } from './namedSpeed.ts';
import { runningMedian } from './runningMedian.ts';

export type { SpectralSpeed } from './namedSpeed.ts';

export interface SpectralSpeedOptions {
  /** Harmonics summed per candidate (H), 1..16. Default 5. */
  harmonics?: number;
  /**
   * The noise floor and score contributions of this very spectrum as far as an earlier estimate
   * computed them (a frame read again over another range): they depend on the line alone, so
   * only the lines beyond `upTo` are computed, and kept here for the next reading.
   */
  floors?: SpectrumFloors;
  /**
   * The speed alone: the answer is the one the full estimate gives except that its confidence is
   * not worked out (NaN). For a caller that needs the confidence only for some speeds.
   */
  speedOnly?: boolean;
}

/** A spectrum's running-median floor and score contributions for lines 1..upTo (0: none yet). */
export interface SpectrumFloors {
  floor: Float64Array;
  contrib: Float64Array;
  upTo: number;
}

const DEFAULT_HARMONICS = 5;
const MAX_HARMONICS = 16;
/** Half width of the running-median noise floor, in lines. */
const FLOOR_HALF_LINES = 20;
/** Largest score contribution of one line: log2 of 128x over the floor, less 1. */
const CAP = 6;
/** A line counts as present at this multiple of the floor (9.5 dB). Noise alone exceeds it
 * with probability exp(-(3 x 1.18)^2 / 2) = 0.2 % per line (Rayleigh amplitude, median 1.18 sigma). */
const SUPPORT_RATIO = 3;
/** Ratio above which a line's weight in the frequency fit stops growing. */
const RATIO_CAP = 30;
/** A family member must score this share of the best candidate to be chosen over it. */
const FAMILY_SCORE_FRACTION = 0.5;
/** Largest distance of a harmonic's line from k f1 to join the fit, in lines. */
const HARMONIC_TOL_LINES = 0.5;
const MIN_LINES_TO_1X = 8;
const STRENGTH_SCALE = 4;
/** Lines either side of each harmonic removed when scoring competitors. */
const EXPLAIN_HALF_LINES = 2;

/** Scratch for the floor and the score contributions (the estimate is synchronous; grown on demand). */
let floorScratch = new Float64Array(0);
let contribScratch = new Float64Array(0);
let explainedScratch = new Float64Array(0);

/**
 * The line findLine() found last: its interpolated frequency [0] and its ratio to the floor [1]
 * (a typed array: a double kept in a module variable is a new heap object at every store).
 */
const found = new Float64Array(2);
/** The lines refine() fitted last: how many, and their ratios to the floor in order of harmonic. */
let fitCount = 0;
const fitRatios = new Float64Array(MAX_HARMONICS);

export function estimateSpeedFromSpectrum(
  amplitude: Float64Array,
  binHz: number,
  rangeRpm: [number, number],
  opts?: SpectralSpeedOptions,
): SpectralSpeed {
  const h = opts?.harmonics ?? DEFAULT_HARMONICS;
  if (!Number.isInteger(h) || h < 1 || h > MAX_HARMONICS) return none(`harmonics must be an integer 1..${MAX_HARMONICS}, got ${h}`);
  if (!(binHz > 0) || !Number.isFinite(binHz)) return none(`binHz must be finite and > 0, got ${binHz}`);
  const [minRpm, maxRpm] = rangeRpm;
  if (!(minRpm > 0) || !(maxRpm >= minRpm) || !Number.isFinite(maxRpm)) {
    return none(`rangeRpm must be [min, max] with 0 < min <= max, got [${rangeRpm.join(', ')}]`);
  }
  const fMinHz = minRpm / 60;
  const fMaxHz = maxRpm / 60;
  if (fMinHz < MIN_LINES_TO_1X * binHz) {
    return none(
      `resolution too coarse: 1X at ${minRpm} rpm is ${(fMinHz / binHz).toFixed(1)} lines from DC, ` +
        `needs binHz <= ${(fMinHz / MIN_LINES_TO_1X).toFixed(4)} Hz, got ${binHz}`,
    );
  }
  const lastLine = amplitude.length - 1;
  if (fMaxHz / binHz > lastLine - 1) {
    return none(`range top ${maxRpm} rpm (${fMaxHz.toFixed(2)} Hz) lies beyond the spectrum's ${(lastLine * binHz).toFixed(2)} Hz`);
  }
  // Lines the scores can touch, plus room for interpolation and the floor window.
  const topLine = Math.min(lastLine, Math.ceil((h * fMaxHz) / binHz) + 2);
  for (let i = 1; i <= topLine; i++) {
    if (!Number.isFinite(amplitude[i]) || amplitude[i] < 0) return none(`amplitude at line ${i} is ${amplitude[i]}: not a finite, non-negative value`);
  }

  if (floorScratch.length < topLine + 1) {
    floorScratch = new Float64Array(2 * (topLine + 1));
    contribScratch = new Float64Array(2 * (topLine + 1));
    explainedScratch = new Float64Array(2 * (topLine + 1));
  }
  const kept = opts?.floors;
  if (kept && kept.floor.length < topLine + 1) {
    const floorGrown = new Float64Array(2 * (topLine + 1));
    const contribGrown = new Float64Array(2 * (topLine + 1));
    floorGrown.set(kept.floor.subarray(0, kept.upTo + 1));
    contribGrown.set(kept.contrib.subarray(0, kept.upTo + 1));
    kept.floor = floorGrown;
    kept.contrib = contribGrown;
  }
  const floor = kept ? kept.floor : floorScratch;
  const contrib = kept ? kept.contrib : contribScratch;
  const from = kept ? kept.upTo + 1 : 1;
  if (from <= topLine) {
    runningMedian(amplitude, FLOOR_HALF_LINES, topLine, lastLine, floor, from);
    contrib[0] = 0;
    for (let i = from; i <= topLine; i++) contrib[i] = contribution(amplitude[i], floor[i]);
    if (kept) kept.upTo = topLine;
  }

  // Harmonic sum on the grid.
  const stepHz = binHz / (4 * h);
  const steps = Math.max(1, Math.ceil((fMaxHz - fMinHz) / stepHz));
  const grid: HarmonicGrid = { fMinHz, fMaxHz, stepHz, steps, binHz, harmonics: h, topLine };
  const { fHz: bestHz, score: bestScore } = gridBest(grid, contrib);
  if (bestScore <= 0) return none('no line stands above the noise floor in the range or at its harmonics');

  // Family resolution: lowest member with its own line and a fair share of the score.
  // Members in order: f* / m for m = h..2, f* itself, f* n for n = 2..h (those in range).
  const edgeTolHz = 0.5 * binHz;
  let chosenHz = Number.NaN;
  let f1Hz = Number.NaN;
  for (let q = -h; q <= h; q++) {
    if (q === -1 || q === 0) continue;
    const m = q < 0 ? -q : 1;
    const fHz = q < 0 ? bestHz / m : q === 1 ? bestHz : bestHz * q;
    if (q !== 1 && !inRange(fHz, fMinHz, fMaxHz, edgeTolHz)) continue;
    if (!findLine(amplitude, floor, binHz, fHz, 1, topLine)) continue;
    if (fHz !== bestHz && bestLocalScore(grid, fHz, contrib) < FAMILY_SCORE_FRACTION * bestScore) continue;
    // Below f* / 2 a lone line at f* / m is too easily a coincidence: ask for a second line of
    // its own (a harmonic k that is not a multiple of m, so not one of f*'s).
    if (m >= 3 && ownLines(amplitude, floor, binHz, fHz, m, h, topLine) < 2) continue;
    const fitHz = refine(amplitude, floor, binHz, fHz, h, topLine);
    // The refined 1X must still have f* as its m-th harmonic (within a line), else the lines
    // near f* / m were a different, merely nearby family.
    if (m >= 2 && Math.abs(m * fitHz - bestHz) > binHz) continue;
    chosenHz = fHz;
    f1Hz = fitHz;
    break;
  }
  let reasonNote = '';
  if (Number.isNaN(chosenHz)) {
    // No member shows its own 1X line: a missing fundamental, judged on harmonics alone.
    chosenHz = bestHz;
    f1Hz = refine(amplitude, floor, binHz, bestHz, h, topLine);
    reasonNote = '; no line at 1X itself, speed from harmonics only';
  } else if (chosenHz < bestHz * 0.99) {
    reasonNote = `; 1X chosen below the strongest family member (${(bestHz / chosenHz).toFixed(0)}X)`;
  }
  // The last refine() was the chosen member's: fitCount and fitRatios hold its lines.
  if (fitCount === 0) return none('no harmonic of the best candidate stands above the noise floor');
  if (!inRange(f1Hz, fMinHz, fMaxHz, edgeTolHz)) {
    return none(`best candidate ${(f1Hz * 60).toFixed(1)} rpm refines to outside the range [${minRpm}, ${maxRpm}] rpm`);
  }
  const supporting = fitCount;
  if (supporting < 2 && !findLine(amplitude, floor, binHz, f1Hz, 1, topLine)) {
    return none('only one harmonic above the noise floor and no 1X line: not enough to name a speed');
  }
  if (opts?.speedOnly) return { rpm: f1Hz * 60, confidence: Number.NaN, supportingHarmonics: supporting, reason: 'speed alone (confidence not worked out)' };

  // Confidence.
  let evidence = 0;
  for (let i = 0; i < fitCount; i++) evidence += contribution(fitRatios[i], 1);
  const strength = (1 - Math.exp(-evidence / STRENGTH_SCALE)) * (supporting >= 2 ? 1 : 0.5);
  const explained = explainedScratch;
  explained.set(contrib.subarray(0, topLine + 1));
  for (let k = 1; k * f1Hz <= (topLine + EXPLAIN_HALF_LINES) * binHz; k++) {
    const centre = Math.round((k * f1Hz) / binHz);
    for (let i = Math.max(0, centre - EXPLAIN_HALF_LINES); i <= Math.min(topLine, centre + EXPLAIN_HALF_LINES); i++) explained[i] = 0;
  }
  const competitor = gridMax(grid, explained);
  const own = Math.max(harmonicScore(grid, f1Hz, contrib), bestLocalScore(grid, f1Hz, contrib));
  const uniqueness = own > 0 ? Math.min(1, Math.max(0, 1 - (competitor / own) ** 2)) : 0;
  const confidence = strength * uniqueness;
  return new NamedSpeed(f1Hz * 60, confidence, supporting, f1Hz, h, strength, uniqueness, reasonNote);
}

/**
 * The highest line of a spectrum of `length` lines that an estimate over `rangeRpm` reads (its
 * scores and lines up to H x the range top, and the floor's window beyond them): a caller that
 * builds the spectrum for it may leave the lines above unwritten.
 */
export function highestLineRead(length: number, binHz: number, rangeRpm: [number, number], harmonics = DEFAULT_HARMONICS): number {
  const lastLine = length - 1;
  const topLine = Math.min(lastLine, Math.ceil((harmonics * (rangeRpm[1] / 60)) / binHz) + 2);
  return Math.min(lastLine, topLine + FLOOR_HALF_LINES);
}

function none(reason: string): SpectralSpeed {
  return { rpm: null, confidence: 0, supportingHarmonics: 0, reason };
}

/** Whether f lies in [fMin, fMax] widened by tol either side. */
function inRange(f: number, fMinHz: number, fMaxHz: number, tolHz: number): boolean {
  return f >= fMinHz - tolHz && f <= fMaxHz + tolHz;
}

/** Score contribution of a line `ratio` times the floor, from amplitude and floor. */
function contribution(a: number, floor: number): number {
  if (!(a > 0)) return 0;
  if (!(floor > 0)) return CAP;
  const ratio = a / floor;
  // log2 of a ratio up to 2 is at most 1, which contributes 0: most lines, without the log.
  if (ratio <= 2) return 0;
  return Math.min(CAP, Math.max(0, Math.log2(ratio) - 1));
}

/**
 * Whether there is a local maximum within +-halfWidthLines of fHz that stands SUPPORT_RATIO
 * above the floor; the one nearest fHz is left in `found` (its frequency interpolated for the
 * Hann window, its ratio): no object per line, the estimate runs dozens of times a second.
 *
 * Three-line estimator: for a Hann window a tone delta lines right of line k gives magnitudes
 * proportional to 1/((1+d)(2+d)), 1/((1-d)(1+d)), 1/((1-d)(2-d)) at k-1, k, k+1 (the common
 * sin(pi d)/(pi d) factor cancels), so (a_{k+1} - a_{k-1}) / (a_{k-1} + 2 a_k + a_{k+1}) = d/2
 * exactly for a lone tone.
 */
function findLine(
  amplitude: Float64Array,
  floor: Float64Array,
  binHz: number,
  fHz: number,
  halfWidthLines: number,
  topLine: number,
): boolean {
  const x = fHz / binHz;
  const lo = Math.max(2, Math.ceil(x - halfWidthLines));
  const hi = Math.min(topLine - 1, Math.floor(x + halfWidthLines));
  let hit = false;
  let bestDist = Infinity;
  for (let k = lo; k <= hi; k++) {
    const a = amplitude[k];
    if (!(a >= amplitude[k - 1] && a >= amplitude[k + 1])) continue;
    const ratio = floor[k] > 0 ? a / floor[k] : Infinity;
    if (ratio < SUPPORT_RATIO) continue;
    const l = amplitude[k - 1];
    const r = amplitude[k + 1];
    const d = (2 * (r - l)) / (l + 2 * a + r);
    const freqHz = (k + d) * binHz;
    const dist = Math.abs(freqHz - fHz);
    if (dist < bestDist) {
      bestDist = dist;
      found[0] = freqHz;
      found[1] = ratio;
      hit = true;
    }
  }
  return hit;
}

/** Lines present at k fHz for k = 1..h that are not multiples of m. */
function ownLines(
  amplitude: Float64Array,
  floor: Float64Array,
  binHz: number,
  fHz: number,
  m: number,
  h: number,
  topLine: number,
): number {
  let n = 0;
  for (let k = 1; k <= h; k++) {
    if (k % m === 0 || (k * fHz) / binHz >= topLine - 1) continue;
    if (findLine(amplitude, floor, binHz, k * fHz, 1, topLine)) n++;
  }
  return n;
}

/** Best score within +-1 grid step of a quarter line around fHz (a member computed as f* / m is off the grid). */
function bestLocalScore(grid: HarmonicGrid, fHz: number, c: Float64Array): number {
  const step = grid.binHz / (4 * grid.harmonics);
  let best = 0;
  for (let j = -4; j <= 4; j++) best = Math.max(best, harmonicScore(grid, fHz + j * step * 0.25, c));
  return best;
}

/**
 * Weighted least-squares 1X from the supported harmonics, grown from k = 1 upward; the lines it
 * fitted are left in fitCount and fitRatios (their ratios to the floor).
 */
function refine(
  amplitude: Float64Array,
  floor: Float64Array,
  binHz: number,
  startHz: number,
  h: number,
  topLine: number,
): number {
  let f1Hz = startHz;
  let sumW = 0;
  let sumWkF = 0;
  fitCount = 0;
  for (let k = 1; k <= h; k++) {
    const expectHz = k * f1Hz;
    if (expectHz / binHz >= topLine - 1) break;
    // Until a line anchors the fit, search a full line either side of the grid estimate.
    const half = fitCount === 0 ? 1 : HARMONIC_TOL_LINES;
    if (!findLine(amplitude, floor, binHz, expectHz, half + 0.5, topLine) || Math.abs(found[0] - expectHz) > half * binHz) continue;
    const lineHz = found[0];
    const ratio = found[1];
    const r = Math.min(ratio, RATIO_CAP);
    const w = r * r;
    sumW += w * k * k;
    sumWkF += w * k * lineHz;
    f1Hz = sumWkF / sumW;
    fitRatios[fitCount++] = ratio;
  }
  return f1Hz;
}
