import { expect } from 'vitest';
import type { AssetConfig, ComponentConfig } from '../../src/config/types.ts';
import type { Profile } from '../../src/simulation/profile.ts';
import { synthesize, synthesisLayout } from '../../src/simulation/synthesize.ts';
import { DEFAULT_TRANSIENT_SETTINGS } from '../../src/transients/transientSettings.ts';

// Fixtures of the simulator's tests (test/simulate*.test.ts): an asset built by hand (the
// simulator must not depend on the map parser), a profile, a whole synthesis, and a sine fit.

export function component(id: string, fnHz: number, zeta: number, orderIds: string[], sensorIds = ['acc']): ComponentConfig {
  const q = 1 / (2 * zeta);
  return { id, fnHz, q, zeta, bandHz: [fnHz * (1 - zeta), fnHz * (1 + zeta)], dampingGiven: 'zeta', orderIds, sensorIds };
}

export function asset(overrides: Partial<AssetConfig> = {}): AssetConfig {
  return {
    id: 'test-fan',
    description: 'fan on a test stand',
    procedure: 'test procedure',
    speed: { source: 'tach', channel: 1, pulsesPerRev: 1, rangeRpm: [300, 1800], minConfidence: 0.6, maxAgeS: 2 },
    orders: [
      { id: '1x', multiple: 1, kind: 'multiple', derivation: 'multiple 1' },
      { id: 'blade-pass', multiple: 7, kind: 'blade-pass', derivation: '7 blades' },
    ],
    sensors: [{ id: 'acc', channel: 0, units: 'g', scale: 1 }],
    transients: { ...DEFAULT_TRANSIENT_SETTINGS },
    components: [],
    alarm: { onDelayS: 30, offDelayS: 10, deadbandPct: 1, priority: 'high', escalateAfterS: 300, escalateGrowth: 2 },
    analysis: { frameSize: 4096, overlap: 0.5, averages: 4, decimation: 1, decisionStepS: 1 },
    severity: { zoneBoundariesMmS: [2.8, 7.1, 18], basis: 'test' },
    ...overrides,
  };
}

export function profile(overrides: Partial<Profile> = {}): Profile {
  return {
    sampleRateHz: 2560,
    startRpm: 600,
    segments: [{ kind: 'hold', durationS: 2 }],
    forcing: [{ orderId: '1x', amplitudeG: 0.02, scaling: 'constant' }],
    noiseG: 0,
    seed: 7,
    ...overrides,
  };
}

/** All blocks of a synthesis joined into whole channels. */
export function run(a: AssetConfig, p: Profile, framesPerBlock = 4096): Float32Array[] {
  const layout = synthesisLayout(a, p);
  const out = layout.channelNames.map(() => new Float32Array(layout.frames));
  for (const b of synthesize(a, p, { framesPerBlock })) b.channels.forEach((c, i) => out[i].set(c, b.startFrame));
  return out;
}

/** Least-squares fit of y ~ A sin(w t - phi) over samples [from, to): returns A and phi (rad). */
export function fitSine(y: ArrayLike<number>, fHz: number, fsHz: number, from: number, to: number): { amplitude: number; lagRad: number } {
  let ss = 0, cc = 0, sc = 0, ys = 0, yc = 0;
  for (let n = from; n < to; n++) {
    const w = (2 * Math.PI * fHz * n) / fsHz;
    const s = Math.sin(w), c = Math.cos(w);
    ss += s * s; cc += c * c; sc += s * c; ys += y[n] * s; yc += y[n] * c;
  }
  const det = ss * cc - sc * sc;
  const a = (ys * cc - yc * sc) / det; // coefficient of sin = A cos(phi)
  const b = (yc * ss - ys * sc) / det; // coefficient of cos = -A sin(phi)
  return { amplitude: Math.hypot(a, b), lagRad: Math.atan2(-b, a) };
}

export function within(label: string, actual: number, expected: number, tol: number, input: string): void {
  if (!(Math.abs(actual - expected) <= tol)) {
    expect.fail(`${label}: input ${input}; expected ${expected}, actual ${actual}, |diff| ${Math.abs(actual - expected)} > tolerance ${tol}`);
  }
}
