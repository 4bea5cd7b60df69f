import { describe, expect, it } from 'vitest';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { RollingSpectrum, type SpectrumFrame } from '../src/manipulation/rollingSpectrum.ts';
import { accelerationToVelocityMmS } from '../src/manipulation/spectrumMath.ts';
import {
  DEFAULT_ZONE_BASIS,
  DEFAULT_ZONE_BOUNDARIES_MM_S,
  SEVERITY_BAND_HZ,
  broadbandVelocityRmsMmS,
  zoneOf,
} from '../src/manipulation/velocitySeverity.ts';
import { expectRelClose, sine } from './support/signals.ts';

const RATE_HZ = 12_800;
const FRAME = 8192; // 1.5625 Hz lines

async function velocitySpectrum(accelerationG: Float32Array): Promise<{ frame: SpectrumFrame; velocity: Float64Array }> {
  const rs = new RollingSpectrum({ inputRateHz: RATE_HZ, frameSize: FRAME, overlap: 0, averages: 1, decimation: 1, fft: await createRealFft(FRAME) });
  const frame = rs.push(accelerationG, 0)[0];
  const velocity = new Float64Array(frame.amplitude.length);
  accelerationToVelocityMmS(frame.amplitude, frame.binHz, 'g', velocity);
  return { frame, velocity };
}

describe('broadband velocity severity', () => {
  it('measures 10 to 1000 Hz (ISO 20816-1 band for machines above 600 rpm)', () => {
    expect(SEVERITY_BAND_HZ).toEqual([10, 1000]);
  });

  it('RMS of two in-band sines is sqrt(v1^2 + v2^2); a 5 Hz and a 2000 Hz sine are left out', async () => {
    // Hand calculation: velocity peak = a / (2 pi f), a in m/s^2 (1 g = 9.80665 m/s^2).
    // Lines: 100 Hz = line 64, 250 Hz = line 160; both on lines. Tolerance 1e-4: float32 and
    // the few 1e-6 of a Hann tone's power outside +-8 lines.
    const g = 9.80665;
    const x = sine(FRAME, 100, RATE_HZ, 0.5);
    const s2 = sine(FRAME, 250, RATE_HZ, 1.2, 1);
    const out1 = sine(FRAME, 5, RATE_HZ, 0.01, 2);
    const out2 = sine(FRAME, 2000, RATE_HZ, 3, 0.5);
    for (let i = 0; i < FRAME; i++) x[i] += s2[i] + out1[i] + out2[i];
    const { frame, velocity } = await velocitySpectrum(x);
    const v1 = ((0.5 * g) / (2 * Math.PI * 100)) * 1000;
    const v2 = ((1.2 * g) / (2 * Math.PI * 250)) * 1000;
    const expected = Math.sqrt((v1 * v1 + v2 * v2) / 2);
    expectRelClose('velocity RMS 10-1000 Hz, mm/s', broadbandVelocityRmsMmS(velocity, frame.binHz), expected, 1e-4);
  });

  it('zoneOf: below the first boundary is A; reaching a boundary enters the next zone', () => {
    const b: [number, number, number] = [1.4, 2.8, 4.5];
    expect([0, 1.39, 1.4, 2.79, 2.8, 4.49, 4.5, 50].map((v) => zoneOf(v, b))).toEqual(['A', 'A', 'B', 'B', 'C', 'C', 'D', 'D']);
  });

  it('default boundaries are 1.4 / 2.8 / 4.5 mm/s, marked as recalled and to be replaced', () => {
    // From memory: ISO 10816-3 group 2, rigid foundation; the basis string must say so.
    expect(DEFAULT_ZONE_BOUNDARIES_MM_S).toEqual([1.4, 2.8, 4.5]);
    expect(DEFAULT_ZONE_BASIS).toMatch(/recalled from memory/);
    expect(DEFAULT_ZONE_BASIS).toMatch(/replace with the site/);
  });

  it('zoneOf rejects NaN and negative RMS, and boundaries that do not increase', () => {
    const b: [number, number, number] = [1.4, 2.8, 4.5];
    expect(() => zoneOf(Number.NaN, b)).toThrow(/velocity RMS must be a finite number >= 0 mm\/s, got NaN/);
    expect(() => zoneOf(-1, b)).toThrow(/got -1/);
    expect(() => zoneOf(1, [2.8, 1.4, 4.5])).toThrow(/zone boundaries must be finite, positive and increasing, got \[2.8, 1.4, 4.5\]/);
  });
});
