/**
 * An independent model of a machine sweeping its speed through structural modes, integrated
 * with the odex ODE solver (a general-purpose integrator from the registry, not qband's code):
 *
 *   speed      rpm(t) = rpm0 + (rpm1 - rpm0) t / T for 0 <= t <= T, held after; shaft angle
 *              theta(t) its exact integral (revolutions)
 *   force      F(t) = (rpm / rpmRef)^2 cos(2 pi k theta + phase)  (unbalance grows as speed^2)
 *   modes      x_i'' + 2 zeta_i w_i x_i' + w_i^2 x_i = g_i F(t)    (unit modal mass)
 *   sensor     acceleration a = sum_i x_i'' in m/s^2 scaled to g, plus seeded white noise
 *   harmonics  optional direct lines h_m (rpm / rpmRef)^2 cos(2 pi m theta) (g), as a real shaft
 *              shows its 2X, 3X...: what a tachless speed estimate locks onto
 *   tach       a 5 V pulse for 1 ms after each whole revolution of theta (once per rev)
 *
 * Expected values in tests come from these parameters, never from qband's functions.
 */
import { Solver } from './odex.ts';

export interface Mode {
  fnHz: number;
  q: number;
  gain: number;
}

export interface SweepSpec {
  sampleRateHz: number;
  durationS: number;
  rpm0: number;
  rpm1: number;
  /** Ramp time (s); the speed holds at rpm1 afterwards. */
  rampS: number;
  multiple: number;
  modes: Mode[];
  /** Acceleration scale to g: the modal acceleration is multiplied by this. */
  scaleG: number;
  noiseG: number;
  seed: number;
  /** Direct harmonic lines: multiple of shaft speed and amplitude (g at rpmRef). */
  harmonics?: Array<{ multiple: number; g: number }>;
}

export function sweepSpeedRpm(spec: SweepSpec, tS: number): number {
  const f = Math.min(1, Math.max(0, tS / spec.rampS));
  return spec.rpm0 + (spec.rpm1 - spec.rpm0) * f;
}

/** Exact revolutions at tS. */
export function sweepRevolutions(spec: SweepSpec, tS: number): number {
  const a = (spec.rpm1 - spec.rpm0) / spec.rampS;
  if (tS <= spec.rampS) return (spec.rpm0 * tS + (a * tS * tS) / 2) / 60;
  return (spec.rpm0 * spec.rampS + (a * spec.rampS * spec.rampS) / 2 + spec.rpm1 * (tS - spec.rampS)) / 60;
}

/** A small seeded generator (xorshift32 with Box-Muller), independent of qband's. */
function gaussian(seed: number): () => number {
  let s = seed >>> 0 || 1;
  const u = (): number => {
    s ^= s << 13;
    s >>>= 0;
    s ^= s >>> 17;
    s ^= s << 5;
    s >>>= 0;
    return (s + 0.5) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(u())) * Math.cos(2 * Math.PI * u());
}

export function synthesizeSweep(spec: SweepSpec): { accelG: Float32Array; tach: Float32Array } {
  const n = Math.round(spec.durationS * spec.sampleRateHz);
  const rpmRef = Math.max(spec.rpm0, spec.rpm1);
  const force = (t: number): number => {
    const r = sweepSpeedRpm(spec, t) / rpmRef;
    return r * r * Math.cos(2 * Math.PI * spec.multiple * sweepRevolutions(spec, t) + 0.7);
  };
  const dim = 2 * spec.modes.length;
  const solver = new Solver(dim);
  solver.absoluteTolerance = 1e-10;
  solver.relativeTolerance = 1e-10;
  solver.maxSteps = 1e8;
  solver.denseOutput = true;
  const w = spec.modes.map((m) => 2 * Math.PI * m.fnHz);
  const z = spec.modes.map((m) => 1 / (2 * m.q));
  // Start in the steady state of the starting speed so no start-up transient rings.
  const y0: number[] = [];
  const f0 = (spec.multiple * spec.rpm0) / 60;
  spec.modes.forEach((m, i) => {
    const wf = 2 * Math.PI * f0;
    const r0 = (spec.rpm0 / rpmRef) ** 2;
    const dr = w[i] * w[i] - wf * wf;
    const di = 2 * z[i] * w[i] * wf;
    const den = dr * dr + di * di;
    // Complex steady state of g e^{j(0.7)} / (dr + j di), real part at t = 0.
    const cr = Math.cos(0.7) * m.gain * r0;
    const ci = Math.sin(0.7) * m.gain * r0;
    const xr = (cr * dr + ci * di) / den;
    const xi = (ci * dr - cr * di) / den;
    y0.push(xr, -wf * xi);
  });
  const accel = new Float32Array(n);
  const rand = gaussian(spec.seed);
  let k = 0;
  const dt = 1 / spec.sampleRateHz;
  const deriv = (t: number, y: number[]): number[] => {
    const f = force(t);
    const d: number[] = [];
    spec.modes.forEach((m, i) => {
      d.push(y[2 * i + 1], m.gain * f - 2 * z[i] * w[i] * y[2 * i + 1] - w[i] * w[i] * y[2 * i]);
    });
    return d;
  };
  const sample = (t: number, y: number[]): void => {
    const d = deriv(t, y);
    let a = 0;
    for (let i = 0; i < spec.modes.length; i++) a += d[2 * i + 1];
    let direct = 0;
    if (spec.harmonics) {
      const r = sweepSpeedRpm(spec, t) / rpmRef;
      const rev = sweepRevolutions(spec, t);
      for (const h of spec.harmonics) direct += h.g * r * r * Math.cos(2 * Math.PI * h.multiple * rev + h.multiple);
    }
    accel[k] = a * spec.scaleG + direct + spec.noiseG * rand();
  };
  accel[0] = 0;
  sample(0, y0);
  k = 1;
  solver.solve(deriv, 0, y0, (n - 1) * dt, (_n, _tOld, t, _y, dense) => {
    while (k < n && k * dt <= t) {
      const tk = k * dt;
      const y = Array.from({ length: dim }, (_, j) => dense!(j, tk));
      sample(tk, y);
      k++;
    }
  });
  const tach = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const rev = sweepRevolutions(spec, i * dt);
    const since = (rev - Math.floor(rev)) / (sweepSpeedRpm(spec, i * dt) / 60);
    tach[i] = since < 0.001 ? 5 : 0;
  }
  return { accelG: accel, tach };
}
