/**
 * Q from free decays: where a component rings on its own after an order has swept past (or the
 * forcing stopped), the envelope at its fn falls as exp(-sigma t) with sigma = zeta w0, and the
 * logarithmic decrement per cycle is delta = sigma Td = 2 pi zeta / sqrt(1 - zeta^2).
 *
 * The envelope is the component's fixed-frequency track in a transient record (a Hann window
 * of T at the map's fn). A point counts as free ringing only where what the orders exciting
 * the component put into that window is under a tenth of what is measured: the order's own
 * amplitude times the Hann window's response at its distance from fn,
 *   W(x) = |sinc(x) / (1 - x^2)|,  x = (f_order - fn) T   (W(0) = 1, W(1) = 1/2, 0 beyond 2 but for sidelobes under 3 %).
 * A decay is a run of such points falling from a local maximum, at least DECAY_MIN_DROP in
 * log amplitude, fitted by a straight line in log amplitude against time. It stops where the
 * envelope comes within FLOOR_MARGIN of the track's floor (the lowest running median of five
 * points): closer to the noise the envelope reads high and would flatten the slope (Q high).
 * The ringing frequency comes from the slope of the phase.
 */
import type { DecayTrack, OrderTrack } from '../transients/transientRecord.ts';

export interface DecayFit {
  sigmaPerS: number;
  ringHz: number;
  fnHz: number;
  zeta: number;
  q: number;
  /** Cycles of ringing the fit spans. */
  cycles: number;
  /** Q at the decay rate +-2 standard errors of the slope (points half a window apart share samples: errors x sqrt 2). */
  qBounds: [number, number];
  /** fn +-2 standard errors of the phase slope. */
  fnBoundsHz: [number, number];
  r2: number;
  tStartS: number;
  tEndS: number;
  /** The envelope fitted (time, velocity RMS) and the line's value at the first point. */
  points: Array<[number, number]>;
  startAmplitude: number;
}

/** Share of the measured envelope the orders may contribute for a point to count as free. */
const LEAKAGE_SHARE = 0.1;
/** Smallest fall of the envelope fitted: ln(4), 12 dB. */
const DECAY_MIN_DROP = Math.log(4);
const MIN_POINTS = 5;
const MIN_R2 = 0.95;
/** The fit stops where the envelope is less than this many times the floor (20 dB). */
const FLOOR_MARGIN = 10;

/** The lowest median of five consecutive envelope points. */
function envelopeFloor(values: number[]): number {
  let floor = Number.POSITIVE_INFINITY;
  for (let i = 0; i + 5 <= values.length; i++) {
    const w = values.slice(i, i + 5).sort((a, b) => a - b);
    floor = Math.min(floor, w[2]);
  }
  return Number.isFinite(floor) ? floor : 0;
}

function hannResponse(x: number): number {
  const ax = Math.abs(x);
  if (ax < 1e-9) return 1;
  if (Math.abs(ax - 1) < 1e-9) return 0.5;
  const sinc = Math.sin(Math.PI * ax) / (Math.PI * ax);
  return Math.abs(sinc / (1 - ax * ax));
}

/** The leakage of the orders into the decay track's window at time tS (mm/s). */
function orderLeakage(orders: OrderTrack[], tS: number, freqHz: number, windowS: number): number {
  let sum = 0;
  for (const o of orders) {
    const pts = o.points;
    if (pts.length === 0 || tS < pts[0][0] - 1e-9 || tS > pts[pts.length - 1][0] + 1e-9) return Number.POSITIVE_INFINITY;
    let j = 0;
    while (j < pts.length - 1 && pts[j + 1][0] <= tS) j++;
    const p = pts[j];
    sum += p[2] * hannResponse(((o.multiple * p[1]) / 60 - freqHz) * windowS);
  }
  return sum;
}

export function findFreeDecays(decay: DecayTrack, orders: OrderTrack[]): DecayFit[] {
  const pts = decay.points;
  if (pts.length < MIN_POINTS) return [];
  const floor = envelopeFloor(pts.map((p) => p[1]));
  const free = pts.map((p) => p[1] > 0 && orderLeakage(orders, p[0], decay.freq_hz, decay.window_s) <= LEAKAGE_SHARE * p[1]);
  const fits: DecayFit[] = [];
  let i = 0;
  while (i < pts.length) {
    // A local maximum among free points starts a candidate.
    if (!free[i] || (i > 0 && free[i - 1] && pts[i - 1][1] >= pts[i][1]) || (i + 1 < pts.length && pts[i + 1][1] > pts[i][1])) {
      i++;
      continue;
    }
    let j = i;
    while (j + 1 < pts.length && free[j + 1] && pts[j + 1][1] > FLOOR_MARGIN * floor && pts[j + 1][1] < pts[i][1] * 1.05) j++;
    const fit = j - i + 1 >= MIN_POINTS ? fitDecay(pts.slice(i, j + 1), decay.freq_hz) : null;
    if (fit && Math.log(pts[i][1] / pts[j][1]) >= DECAY_MIN_DROP && fit.r2 >= MIN_R2 && fit.sigmaPerS > 0) fits.push(fit);
    i = j + 1;
  }
  return fits;
}

/** Least-squares line through ln(amplitude) and through the unwrapped phase against time. */
export function fitDecay(points: Array<[number, number, number]>, watchedHz: number): DecayFit | null {
  const n = points.length;
  const t = points.map((p) => p[0]);
  const y = points.map((p) => Math.log(p[1]));
  const phase: number[] = [];
  let offset = 0;
  points.forEach((p, k) => {
    if (k > 0) {
      const d = p[2] + offset - phase[k - 1];
      if (d > 180) offset -= 360;
      else if (d < -180) offset += 360;
    }
    phase.push(p[2] + offset);
  });
  const line = (ys: number[]): { slope: number; r2: number; se: number } => {
    const tm = t.reduce((s, v) => s + v, 0) / n;
    const ym = ys.reduce((s, v) => s + v, 0) / n;
    let sxy = 0;
    let sxx = 0;
    let syy = 0;
    for (let k = 0; k < n; k++) {
      sxy += (t[k] - tm) * (ys[k] - ym);
      sxx += (t[k] - tm) ** 2;
      syy += (ys[k] - ym) ** 2;
    }
    const slope = sxx > 0 ? sxy / sxx : 0;
    const sse = Math.max(0, syy - slope * sxy);
    const se = n > 2 && sxx > 0 ? Math.sqrt(sse / (n - 2) / sxx) * Math.SQRT2 : Number.POSITIVE_INFINITY;
    return { slope, r2: syy > 0 ? (slope * sxy) / syy : 0, se };
  };
  const amp = line(y);
  const tMean = t.reduce((a, v) => a + v, 0) / n;
  const yMean = y.reduce((a, v) => a + v, 0) / n;
  const ph = line(phase);
  const sigmaPerS = -amp.slope;
  // Phase lag grows as (ring - watched) falls: the ring sits at watched - slope / 360.
  const ringHz = watchedHz - ph.slope / 360;
  if (!(ringHz > 0) || !(sigmaPerS > 0)) return null;
  const qOf = (sigma: number): number => {
    const x = sigma / (2 * Math.PI * ringHz);
    return 1 / (2 * (x / Math.sqrt(1 + x * x)));
  };
  const x = sigmaPerS / (2 * Math.PI * ringHz);
  const zeta = x / Math.sqrt(1 + x * x);
  const fnHz = ringHz / Math.sqrt(1 - zeta * zeta);
  const sigmaHi = sigmaPerS + 2 * amp.se;
  const sigmaLo = Math.max(1e-9, sigmaPerS - 2 * amp.se);
  return {
    sigmaPerS,
    ringHz,
    fnHz,
    zeta,
    q: 1 / (2 * zeta),
    cycles: ringHz * (t[n - 1] - t[0]),
    qBounds: [qOf(sigmaHi), qOf(sigmaLo)],
    fnBoundsHz: [fnHz - (2 * ph.se) / 360, fnHz + (2 * ph.se) / 360],
    r2: amp.r2,
    tStartS: t[0],
    tEndS: t[n - 1],
    points: points.map((p): [number, number] => [p[0], p[1]]),
    startAmplitude: Math.exp(yMean + amp.slope * (t[0] - tMean)),
  };
}

/** Logarithmic decrement from two peak amplitudes `cycles` apart: delta = ln(x0 / xN) / N. */
export function logDecrement(x0: number, xN: number, cycles: number): number {
  return Math.log(x0 / xN) / cycles;
}

/** Damping ratio from a logarithmic decrement: zeta = delta / sqrt(4 pi^2 + delta^2). */
export function zetaFromLogDecrement(delta: number): number {
  return delta / Math.sqrt(4 * Math.PI * Math.PI + delta * delta);
}
