/**
 * What a single-degree-of-freedom component would show on a measured sweep: the order track a
 * mode of natural frequency fn and damping ratio zeta gives when driven along the sweep's own
 * speed history, demodulated exactly as the capture demodulated the measurement.
 *
 * Model (per unit modal mass), theta the shaft angle in revolutions, k the order's multiple:
 *   x'' + 2 zeta w0 x' + w0^2 x = (rpm(t) / rpmRef)^n exp(j 2 pi k theta(t)),   a = x''
 * The force grows as speed^n (n = 2 for unbalance and for most fluid forces; the fit estimates
 * n so that neither the forcing law nor the sensor's quantity biases Q). The complex force
 * carries both quadratures at once; a real force of any phase is Re(g* times it).
 *
 * Integration: the exact transition of the damped oscillator over each step h with the force
 * held at its mid-step value (second-order accurate in h; the step is a small fraction of the
 * period of the highest frequency simulated). The sweep is simulated through time, so the
 * lag of the response on a fast sweep (peak late and low, ringing after the passage) is in
 * the model and does not bias fn or Q.
 *
 * Each point of the track is the Hann-weighted demodulation over its window, converted to
 * velocity (divided by j w of the order at the window's mean speed) like the measured points.
 */
import { hannWeights } from '../transients/orderDemodulation.ts';

export interface SweepGrid {
  /** Simulation time step (s) and the samples' times, shaft angles and speed ratios. */
  stepS: number;
  tS: Float64Array;
  /** Reference phasor exp(-j 2 pi k theta) per sample. */
  refRe: Float64Array;
  refIm: Float64Array;
  /** ln(rpm / rpmRef) per sample. */
  lnSpeed: Float64Array;
  /** Per point: first and last sample of its window, and the order's angular frequency. */
  windows: Array<{ from: number; to: number; omega: number }>;
  /** Scratch for the simulated acceleration (one allocation per grid). */
  aRe: Float64Array;
  aIm: Float64Array;
}

export interface TrackPoint {
  tS: number;
  speedRpm: number;
}

/** Samples per period of the highest frequency simulated. */
const SAMPLES_PER_PERIOD = 24;

/**
 * Precomputes everything about a sweep that does not depend on the mode: the time grid, the
 * angle (trapezoidal integral of the interpolated speed) and the reference phasors.
 */
export function buildSweepGrid(points: TrackPoint[], multiple: number, windowS: number, topHz: number): SweepGrid {
  const stepS = 1 / (SAMPLES_PER_PERIOD * topHz);
  const t0 = points[0].tS - windowS / 2;
  const t1 = points[points.length - 1].tS + windowS / 2;
  const n = Math.max(2, Math.ceil((t1 - t0) / stepS) + 1);
  const tS = new Float64Array(n);
  const refRe = new Float64Array(n);
  const refIm = new Float64Array(n);
  const lnSpeed = new Float64Array(n);
  const rpmRef = points.reduce((s, p) => s + p.speedRpm, 0) / points.length;
  let j = 0;
  let rev = 0;
  let prevRpm = 0;
  for (let i = 0; i < n; i++) {
    const t = t0 + i * stepS;
    while (j < points.length - 2 && points[j + 1].tS < t) j++;
    const a = points[j];
    const b = points[Math.min(j + 1, points.length - 1)];
    const f = b.tS > a.tS ? Math.min(1, Math.max(0, (t - a.tS) / (b.tS - a.tS))) : 0;
    // Before the first and after the last point the speed is extrapolated along the end segment.
    const fe = b.tS > a.tS ? (t - a.tS) / (b.tS - a.tS) : 0;
    const rpm = Math.max(1e-6, a.speedRpm + (t < a.tS || t > b.tS ? fe : f) * (b.speedRpm - a.speedRpm));
    if (i > 0) rev += ((prevRpm + rpm) / 120) * stepS;
    prevRpm = rpm;
    tS[i] = t;
    const phase = 2 * Math.PI * multiple * (rev - Math.floor(rev));
    refRe[i] = Math.cos(phase);
    refIm[i] = -Math.sin(phase);
    lnSpeed[i] = Math.log(rpm / rpmRef);
  }
  const windows = points.map((p) => {
    const from = Math.max(0, Math.round((p.tS - windowS / 2 - t0) / stepS));
    const to = Math.min(n, Math.round((p.tS + windowS / 2 - t0) / stepS));
    return { from, to, omega: (2 * Math.PI * multiple * p.speedRpm) / 60 };
  });
  return { stepS, tS, refRe, refIm, lnSpeed, windows, aRe: new Float64Array(n), aIm: new Float64Array(n) };
}


/**
 * The model's velocity track (complex, per point) for a mode (fnHz, zeta) and force exponent n.
 * Written into outRe / outIm (one entry per point).
 */
export function sweptModelTrack(grid: SweepGrid, fnHz: number, zeta: number, n: number, outRe: Float64Array, outIm: Float64Array): void {
  const w0 = 2 * Math.PI * fnHz;
  const h = grid.stepS;
  const sigma = zeta * w0;
  const wd = w0 * Math.sqrt(Math.max(1e-12, 1 - zeta * zeta));
  const e = Math.exp(-sigma * h);
  const c = Math.cos(wd * h);
  const s = Math.sin(wd * h);
  const p11 = e * (c + (sigma / wd) * s);
  const p12 = (e * s) / wd;
  const p21 = (-e * w0 * w0 * s) / wd;
  const p22 = e * (c - (sigma / wd) * s);
  const gx = (1 - p11) / (w0 * w0);
  const gv = p12;
  const len = grid.tS.length;
  const aRe = grid.aRe;
  const aIm = grid.aIm;
  const refRe = grid.refRe;
  const refIm = grid.refIm;
  const lnSpeed = grid.lnSpeed;
  const w02 = w0 * w0;
  const twoSigma = 2 * sigma;
  // Start in the steady state of the first sample's frequency, so no start-up transient rings.
  // The force is speed^n exp(+j psi), the conjugate of the reference phasor times speed^n.
  const omega0 = grid.windows[0]?.omega ?? w0;
  let m = Math.exp(n * lnSpeed[0]);
  let fr = m * refRe[0];
  let fi = -m * refIm[0];
  // x = F / (w0^2 - w^2 + 2 j zeta w0 w), v = j w x
  const dr = w02 - omega0 * omega0;
  const di = 2 * zeta * w0 * omega0;
  const den = dr * dr + di * di;
  let xr = (fr * dr + fi * di) / den;
  let xi = (fi * dr - fr * di) / den;
  let vr = -omega0 * xi;
  let vi = omega0 * xr;
  aRe[0] = fr - twoSigma * vr - w02 * xr;
  aIm[0] = fi - twoSigma * vi - w02 * xi;
  for (let i = 1; i < len; i++) {
    m = Math.exp(n * lnSpeed[i]);
    const nr = m * refRe[i];
    const ni = -m * refIm[i];
    const ur = 0.5 * (fr + nr);
    const ui = 0.5 * (fi + ni);
    const xr1 = p11 * xr + p12 * vr + gx * ur;
    const xi1 = p11 * xi + p12 * vi + gx * ui;
    vr = p21 * xr + p22 * vr + gv * ur;
    vi = p21 * xi + p22 * vi + gv * ui;
    xr = xr1;
    xi = xi1;
    fr = nr;
    fi = ni;
    aRe[i] = fr - twoSigma * vr - w02 * xr;
    aIm[i] = fi - twoSigma * vi - w02 * xi;
  }
  grid.windows.forEach((win, k) => {
    const w = hannWeights(win.to - win.from).w;
    let re = 0;
    let im = 0;
    let sum = 0;
    for (let i = win.from; i < win.to; i++) {
      const wi = w[i - win.from];
      const rr = grid.refRe[i];
      const ri = grid.refIm[i];
      re += wi * (aRe[i] * rr - aIm[i] * ri);
      im += wi * (aRe[i] * ri + aIm[i] * rr);
      sum += wi;
    }
    re /= sum;
    im /= sum;
    // Velocity = acceleration / (j w): (re + j im) / (j w) = (im - j re) / w.
    outRe[k] = im / win.omega;
    outIm[k] = -re / win.omega;
  });
}
