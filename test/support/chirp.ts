/**
 * Test signals whose true shaft speed is known in closed form, independent of qband's simulator:
 * a piecewise-linear speed profile, its shaft angle (the integral of speed, piecewise quadratic)
 * and a vibration made of orders of that angle, seeded white noise, and optionally a structural
 * resonance rung by broadband noise (a fixed hump in the spectrum that does not follow speed).
 */
import { gaussianNoise } from './signals.ts';

/** Shaft speed (Hz) starting at startHz, then each segment ramps linearly to toHz over durS (hold: toHz unchanged). */
export interface SpeedProfileHz {
  startHz: number;
  segments: Array<{ durS: number; toHz: number }>;
}

/** Speed (Hz) at t. */
export function speedHzAt(p: SpeedProfileHz, tS: number): number {
  let t0 = 0;
  let f0 = p.startHz;
  for (const s of p.segments) {
    if (tS <= t0 + s.durS) return f0 + ((s.toHz - f0) * (tS - t0)) / s.durS;
    t0 += s.durS;
    f0 = s.toHz;
  }
  return f0;
}

/** Shaft angle in revolutions at t: the exact integral of speedHzAt from 0. */
export function revolutionsAt(p: SpeedProfileHz, tS: number): number {
  let t0 = 0;
  let f0 = p.startHz;
  let revs = 0;
  for (const s of p.segments) {
    const a = (s.toHz - f0) / s.durS;
    if (tS <= t0 + s.durS) {
      const d = tS - t0;
      return revs + f0 * d + (a * d * d) / 2;
    }
    revs += f0 * s.durS + (a * s.durS * s.durS) / 2;
    t0 += s.durS;
    f0 = s.toHz;
  }
  return revs + f0 * (tS - t0);
}

export function profileDurationS(p: SpeedProfileHz): number {
  return p.segments.reduce((s, x) => s + x.durS, 0);
}

export interface OrderTone {
  multiple: number;
  /** Peak amplitude (g) at `refHz` of shaft speed. */
  peakG: number;
  /** 'speed2': amplitude grows with speed squared (unbalance); 'constant'. */
  scaling: 'speed2' | 'constant';
}

/**
 * The demo pump's orders and levels (config/demo-map.yaml, config/demo-profile.yaml): 1X, 2X and
 * vane pass growing with speed squared, the motor bearing's outer-race tone (3.62X) constant.
 */
export const DEMO_PUMP_ORDERS: readonly OrderTone[] = [
  { multiple: 1, peakG: 0.02, scaling: 'speed2' },
  { multiple: 2, peakG: 0.005, scaling: 'speed2' },
  { multiple: 5, peakG: 0.01, scaling: 'speed2' },
  { multiple: 3.62, peakG: 0.003, scaling: 'constant' },
];

export interface ChirpSpec {
  profile: SpeedProfileHz;
  rateHz: number;
  orders: readonly OrderTone[];
  refHz: number;
  /** White noise RMS (g). */
  noiseG: number;
  /** A resonance at fnHz with quality factor q rung by white noise of RMS levelG. */
  structural?: { fnHz: number; q: number; levelG: number };
  seed: number;
}

export function chirpSignal(spec: ChirpSpec): Float32Array {
  const n = Math.round(profileDurationS(spec.profile) * spec.rateHz);
  const x = gaussianNoise(n, spec.noiseG, spec.seed);
  for (let i = 0; i < n; i++) {
    const t = i / spec.rateHz;
    const revs = revolutionsAt(spec.profile, t);
    const f = speedHzAt(spec.profile, t);
    let v = 0;
    for (const o of spec.orders) {
      const a = o.scaling === 'speed2' ? o.peakG * (f / spec.refHz) ** 2 : o.peakG;
      v += a * Math.sin(2 * Math.PI * o.multiple * revs + o.multiple);
    }
    x[i] += v;
  }
  if (spec.structural) {
    // Two-pole resonator (impulse-invariant poles at fn, damping 1 / (2 q)) on white noise.
    const { fnHz, q, levelG } = spec.structural;
    const e = gaussianNoise(n, 1, spec.seed + 1);
    const zeta = 1 / (2 * q);
    const wd = 2 * Math.PI * fnHz * Math.sqrt(1 - zeta * zeta);
    const r = Math.exp((-zeta * 2 * Math.PI * fnHz) / spec.rateHz);
    const a1 = 2 * r * Math.cos(wd / spec.rateHz);
    const a2 = -r * r;
    const y = new Float64Array(n);
    let sum2 = 0;
    for (let i = 0; i < n; i++) {
      y[i] = e[i] + a1 * (i > 0 ? y[i - 1] : 0) + a2 * (i > 1 ? y[i - 2] : 0);
      sum2 += y[i] * y[i];
    }
    const g = levelG / Math.sqrt(sum2 / n);
    for (let i = 0; i < n; i++) x[i] += g * y[i];
  }
  return x;
}
