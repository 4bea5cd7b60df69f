/**
 * Fits a single-degree-of-freedom mode to one or more measured order tracks of the same
 * (component, order): the nonlinear parameters (fn, Q, force exponent n) are shared, and each
 * track gets its own linear ones, solved in closed form for every trial (variable projection):
 *   with phase (a once-per-rev tach):  d = g m + b       g, b complex
 *   amplitude only:                    |d| = |g m + c|   (see amplitudeSolve)
 * where m is the model's track (sweptResponse.ts) and b a background the mode does not explain
 * (other modes, other paths), taken as constant over the narrow window fitted.
 *
 * Uncertainty: the covariance of (ln fn, ln Q, n) from the Jacobian of the residuals at the
 * optimum, s^2 (J^T J)^-1 with s^2 the residual variance, inflated by the window's overlap
 * (points a quarter window apart share most of their samples, so there are about half as
 * many independent points as points); bounds are +-2 sigma.
 */
import { nelderMead } from './nelderMead.ts';
import { buildSweepGrid, sweptModelTrack, type SweepGrid, type TrackPoint } from './sweptResponse.ts';

export interface MeasuredTrack {
  points: TrackPoint[];
  /** Measured complex velocity per point: amplitude and phase lag (degrees) or null phases. */
  amplitude: number[];
  phaseDeg: Array<number | null>;
  multiple: number;
  windowS: number;
}

export interface SweepFit {
  fnHz: number;
  q: number;
  zeta: number;
  forceExponent: number;
  /** +-2 sigma bounds. */
  fnBoundsHz: [number, number];
  qBounds: [number, number];
  /** 1 - residual / total sum of squares over all points fitted. */
  r2: number;
  /** Residual sum of squares of the best smooth curve without a resonance, over the resonance fit's (amplitude). */
  resonanceGain: number;
  usedPhase: boolean;
  points: number;
  /** Per track: the model's amplitude and phase at each point, for pictures. */
  modelTracks: Array<{ amplitude: number[]; phaseDeg: number[] }>;
}

/** Overlap inflation of the covariance: see the header. */
const OVERLAP_INFLATION = 2;
/**
 * Without a tach the speed, and so fn, carries the tachless estimate's error, which the fit's
 * residuals cannot see: +-0.5 % (2 sigma) is added to fn's bounds (the tachless grid in
 * docs/engine.md: errors up to about 0.2 % at demo noise, more near ramp ends and in noise).
 */
const TACHLESS_FN_SHARE = 0.005;

interface Prepared {
  track: MeasuredTrack;
  grid: SweepGrid;
  dRe: Float64Array;
  dIm: Float64Array;
  mRe: Float64Array;
  mIm: Float64Array;
}

export function fitSweep(tracks: MeasuredTrack[], start: { fnHz: number; q: number }, alternatives: Array<{ fnHz: number; q: number }> = []): SweepFit | null {
  if (tracks.length === 0) return null;
  const usedPhase = tracks.every((t) => t.phaseDeg.every((p) => p !== null));
  let topHz = 0;
  for (const t of tracks) for (const p of t.points) topHz = Math.max(topHz, (t.multiple * p.speedRpm) / 60);
  topHz = Math.max(topHz, start.fnHz) * 1.5;
  const prepared: Prepared[] = tracks.map((track) => {
    const n = track.points.length;
    const dRe = new Float64Array(n);
    const dIm = new Float64Array(n);
    track.amplitude.forEach((a, i) => {
      const lag = ((track.phaseDeg[i] ?? 0) * Math.PI) / 180;
      dRe[i] = a * Math.cos(lag);
      dIm[i] = -a * Math.sin(lag);
    });
    return { track, grid: buildSweepGrid(track.points, track.multiple, track.windowS, topHz), dRe, dIm, mRe: new Float64Array(n), mIm: new Float64Array(n) };
  });
  const residuals = (p: number[]): number[] | null => {
    const fnHz = Math.exp(p[0]);
    const q = Math.exp(p[1]);
    if (!(q > 0.6 && q < 1000) || !(p[2] > -6 && p[2] < 8)) return null;
    const out: number[] = [];
    for (const s of prepared) {
      sweptModelTrack(s.grid, fnHz, 1 / (2 * q), p[2], s.mRe, s.mIm);
      if (usedPhase) complexResiduals(s, out);
      else amplitudeResiduals(s, out);
    }
    return out;
  };
  const cost = (p: number[]): number => {
    const r = residuals(p);
    if (!r) return Number.POSITIVE_INFINITY;
    let s = 0;
    for (const v of r) s += v * v;
    return s;
  };
  let best: { x: number[]; value: number } | null = null;
  for (const guess of [start, ...alternatives]) {
    const result = nelderMead(cost, [Math.log(guess.fnHz), Math.log(guess.q), 2], [0.01, 0.3, 1], { maxEvaluations: 250, tolerance: 1e-8 });
    // Restart once from the optimum: a simplex can stall on a ridge.
    const again = nelderMead(cost, result.x, [0.003, 0.1, 0.3], { maxEvaluations: 150, tolerance: 1e-8 });
    const r = again.value < result.value ? again : result;
    if (!best || r.value < best.value) best = r;
  }
  if (!best || !Number.isFinite(best.value)) return null;
  const x = best.x;
  const r0 = residuals(x) as number[];
  // Jacobian by central differences.
  const steps = [1e-4, 1e-3, 1e-2];
  const jac: number[][] = r0.map(() => [0, 0, 0]);
  for (let k = 0; k < 3; k++) {
    const up = x.slice();
    const dn = x.slice();
    up[k] += steps[k];
    dn[k] -= steps[k];
    const ru = residuals(up);
    const rd = residuals(dn);
    if (!ru || !rd) return null;
    for (let i = 0; i < r0.length; i++) jac[i][k] = (ru[i] - rd[i]) / (2 * steps[k]);
  }
  const jtj = [0, 1, 2].map((a) => [0, 1, 2].map((b) => jac.reduce((s, row) => s + row[a] * row[b], 0)));
  const inv = invert3(jtj);
  const linearPerTrack = 4;
  const dof = Math.max(1, r0.length - 3 - linearPerTrack * tracks.length);
  const s2 = (best.value / dof) * OVERLAP_INFLATION;
  const sdLnFitFn = inv ? Math.sqrt(Math.max(0, inv[0][0] * s2)) : Number.POSITIVE_INFINITY;
  const sdLnFn = usedPhase ? sdLnFitFn : Math.hypot(sdLnFitFn, TACHLESS_FN_SHARE / 2);
  const sdLnQ = inv ? Math.sqrt(Math.max(0, inv[1][1] * s2)) : Number.POSITIVE_INFINITY;
  const fnHz = Math.exp(x[0]);
  const q = Math.exp(x[1]);
  // Fit quality over all points, in the domain fitted.
  let total = 0;
  let count = 0;
  const mean: number[] = [0, 0];
  for (const s of prepared) {
    for (let i = 0; i < s.dRe.length; i++) {
      mean[0] += usedPhase ? s.dRe[i] : Math.hypot(s.dRe[i], s.dIm[i]);
      mean[1] += usedPhase ? s.dIm[i] : 0;
      count++;
    }
  }
  mean[0] /= count;
  mean[1] /= count;
  for (const s of prepared) {
    for (let i = 0; i < s.dRe.length; i++) {
      if (usedPhase) total += (s.dRe[i] - mean[0]) ** 2 + (s.dIm[i] - mean[1]) ** 2;
      else total += (Math.hypot(s.dRe[i], s.dIm[i]) - mean[0]) ** 2;
    }
  }
  // Refill the model tracks at the optimum, and judge the resonance against a smooth curve.
  const modelTracks: SweepFit['modelTracks'] = [];
  let resonanceRss = 0;
  let smoothRss = 0;
  for (const s of prepared) {
    sweptModelTrack(s.grid, fnHz, 1 / (2 * q), x[2], s.mRe, s.mIm);
    const fitted = usedPhase ? complexFitted(s) : amplitudeFitted(s);
    modelTracks.push(fitted);
    const amp = Array.from(s.dRe, (re, i) => Math.hypot(re, s.dIm[i]));
    amp.forEach((a, i) => (resonanceRss += (a - fitted.amplitude[i]) ** 2));
    smoothRss += smoothCurveRss(s.track, amp);
  }
  return {
    fnHz,
    q,
    zeta: 1 / (2 * q),
    forceExponent: x[2],
    fnBoundsHz: [fnHz * Math.exp(-2 * sdLnFn), fnHz * Math.exp(2 * sdLnFn)],
    qBounds: [q * Math.exp(-2 * sdLnQ), q * Math.exp(2 * sdLnQ)],
    r2: total > 0 ? 1 - best.value / total : 0,
    resonanceGain: resonanceRss > 0 ? smoothRss / resonanceRss : Number.POSITIVE_INFINITY,
    usedPhase,
    points: count,
    modelTracks,
  };
}

/** Complex least squares d = g m + b; appends re and im residuals. */
function complexSolve(s: Prepared): { gRe: number; gIm: number; bRe: number; bIm: number } {
  const n = s.dRe.length;
  let smm = 0;
  let smRe = 0;
  let smIm = 0;
  let sdRe = 0;
  let sdIm = 0;
  let smdRe = 0;
  let smdIm = 0;
  for (let i = 0; i < n; i++) {
    const mr = s.mRe[i];
    const mi = s.mIm[i];
    smm += mr * mr + mi * mi;
    smRe += mr;
    smIm += mi;
    sdRe += s.dRe[i];
    sdIm += s.dIm[i];
    // conj(m) d
    smdRe += mr * s.dRe[i] + mi * s.dIm[i];
    smdIm += mr * s.dIm[i] - mi * s.dRe[i];
  }
  // [smm, conj(sm); sm, n] [g; b] = [smd; sd]  (sm = sum m)
  // det = smm n - |sm|^2 (real)
  const det = smm * n - (smRe * smRe + smIm * smIm);
  if (!(Math.abs(det) > 0)) return { gRe: 0, gIm: 0, bRe: sdRe / n, bIm: sdIm / n };
  // g = (n smd - conj(sm) sd) / det ; b = (smm sd - sm smd) / det
  const gRe = (n * smdRe - (smRe * sdRe + smIm * sdIm)) / det;
  const gIm = (n * smdIm - (smRe * sdIm - smIm * sdRe)) / det;
  const bRe = (smm * sdRe - (smRe * smdRe - smIm * smdIm)) / det;
  const bIm = (smm * sdIm - (smRe * smdIm + smIm * smdRe)) / det;
  return { gRe, gIm, bRe, bIm };
}

function complexResiduals(s: Prepared, out: number[]): void {
  const { gRe, gIm, bRe, bIm } = complexSolve(s);
  for (let i = 0; i < s.dRe.length; i++) {
    out.push(s.dRe[i] - (gRe * s.mRe[i] - gIm * s.mIm[i] + bRe));
    out.push(s.dIm[i] - (gRe * s.mIm[i] + gIm * s.mRe[i] + bIm));
  }
}

function complexFitted(s: Prepared): { amplitude: number[]; phaseDeg: number[] } {
  const { gRe, gIm, bRe, bIm } = complexSolve(s);
  const amplitude: number[] = [];
  const phaseDeg: number[] = [];
  for (let i = 0; i < s.dRe.length; i++) {
    const re = gRe * s.mRe[i] - gIm * s.mIm[i] + bRe;
    const im = gRe * s.mIm[i] + gIm * s.mRe[i] + bIm;
    amplitude.push(Math.hypot(re, im));
    phaseDeg.push(((((-Math.atan2(im, re) * 180) / Math.PI) % 360) + 360) % 360);
  }
  return { amplitude, phaseDeg };
}

/**
 * Amplitude only (no tach): the measured phase drifts with the tachless angle's error, but that
 * drift multiplies the mode's response and whatever else the order excites alike, so the
 * magnitude |d| = |g m + c| holds with g complex and c a background coherent with the order
 * (taken real: only the phase between them matters). Squared, it is linear in four unknowns:
 *   |d|^2 = A |m|^2 + B + 2 (P Re m - R Im m),   A = |g|^2, B = c^2, P + jR = c g,
 * solved by least squares on the squares (the constraint A B = P^2 + R^2 is left free).
 */
function amplitudeSolve(s: Prepared): number[] {
  const n = s.dRe.length;
  const ata = [0, 1, 2, 3].map(() => [0, 0, 0, 0]);
  const atb = [0, 0, 0, 0];
  const row = [0, 0, 0, 0];
  for (let i = 0; i < n; i++) {
    const mr = s.mRe[i];
    const mi = s.mIm[i];
    row[0] = mr * mr + mi * mi;
    row[1] = 1;
    row[2] = 2 * mr;
    row[3] = -2 * mi;
    const y = s.dRe[i] * s.dRe[i] + s.dIm[i] * s.dIm[i];
    for (let a = 0; a < 4; a++) {
      atb[a] += row[a] * y;
      for (let b = 0; b < 4; b++) ata[a][b] += row[a] * row[b];
    }
  }
  return solveLinear(ata, atb) ?? [0, 0, 0, 0];
}

function amplitudeAt(x: number[], mr: number, mi: number): number {
  return Math.sqrt(Math.max(0, x[0] * (mr * mr + mi * mi) + x[1] + 2 * (x[2] * mr - x[3] * mi)));
}

function amplitudeResiduals(s: Prepared, out: number[]): void {
  const x = amplitudeSolve(s);
  for (let i = 0; i < s.dRe.length; i++) out.push(Math.hypot(s.dRe[i], s.dIm[i]) - amplitudeAt(x, s.mRe[i], s.mIm[i]));
}

function amplitudeFitted(s: Prepared): { amplitude: number[]; phaseDeg: number[] } {
  const x = amplitudeSolve(s);
  const amplitude = Array.from(s.mRe, (re, i) => amplitudeAt(x, re, s.mIm[i]));
  return { amplitude, phaseDeg: amplitude.map(() => Number.NaN) };
}

/** Gaussian elimination with partial pivoting; null when singular. */
function solveLinear(m: number[][], v: number[]): number[] | null {
  const n = v.length;
  const a = m.map((r, i) => [...r, v[i]]);
  for (let c = 0; c < n; c++) {
    let p = c;
    for (let r = c + 1; r < n; r++) if (Math.abs(a[r][c]) > Math.abs(a[p][c])) p = r;
    if (!(Math.abs(a[p][c]) > 1e-300)) return null;
    [a[c], a[p]] = [a[p], a[c]];
    for (let r = c + 1; r < n; r++) {
      const f = a[r][c] / a[c][c];
      for (let k = c; k <= n; k++) a[r][k] -= f * a[c][k];
    }
  }
  const x = new Array<number>(n).fill(0);
  for (let r = n - 1; r >= 0; r--) {
    let sum = a[r][n];
    for (let k = r + 1; k < n; k++) sum -= a[r][k] * x[k];
    x[r] = sum / a[r][r];
  }
  return x;
}

/**
 * Residual of the best curve without a resonance: a power law of the order frequency plus a
 * constant, |d| = a f^m + b, with m searched over -4..6.
 */
function smoothCurveRss(track: MeasuredTrack, amp: number[]): number {
  const f = track.points.map((p) => (track.multiple * p.speedRpm) / 60);
  const fRef = f.reduce((s, v) => s + v, 0) / f.length;
  let best = Number.POSITIVE_INFINITY;
  for (let m = -4; m <= 6; m += 0.25) {
    const x = f.map((v) => (v / fRef) ** m);
    const n = x.length;
    let sxx = 0;
    let sx = 0;
    let sy = 0;
    let sxy = 0;
    for (let i = 0; i < n; i++) {
      sxx += x[i] * x[i];
      sx += x[i];
      sy += amp[i];
      sxy += x[i] * amp[i];
    }
    const det = n * sxx - sx * sx;
    const a = det > 0 ? (n * sxy - sx * sy) / det : 0;
    const b = det > 0 ? (sy - a * sx) / n : sy / n;
    let rss = 0;
    for (let i = 0; i < n; i++) rss += (amp[i] - a * x[i] - b) ** 2;
    best = Math.min(best, rss);
  }
  return best;
}

function invert3(m: number[][]): number[][] | null {
  const [a, b, c] = m[0];
  const [d, e, f] = m[1];
  const [g, h, i] = m[2];
  const A = e * i - f * h;
  const B = -(d * i - f * g);
  const C = d * h - e * g;
  const det = a * A + b * B + c * C;
  if (!(Math.abs(det) > 0) || !Number.isFinite(det)) return null;
  return [
    [A / det, -(b * i - c * h) / det, (b * f - c * e) / det],
    [B / det, (a * i - c * g) / det, -(a * f - c * d) / det],
    [C / det, -(a * h - b * g) / det, (a * e - b * d) / det],
  ];
}
