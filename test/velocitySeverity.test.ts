import { describe, expect, it } from 'vitest';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { RollingSpectrum, type SpectrumFrame } from '../src/manipulation/rollingSpectrum.ts';
import { accelerationToVelocityMmS } from '../src/manipulation/spectrumMath.ts';
import { broadbandVelocityRmsMmS, zoneOf } from '../src/manipulation/velocitySeverity.ts';
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
  // The band's edges are behaviour, not a constant to restate: 10 to 1000 Hz is the measurement
  // band for machines above 600 rpm (ISO 20816-1, from memory); sines just outside it are left out.
  it('RMS of two in-band sines is sqrt(v1^2 + v2^2); sines at 5, 7.8, 1003 and 2000 Hz are left out', async () => {
    // Hand calculation: velocity peak = a / (2 pi f), a in m/s^2 (1 g = 9.80665 m/s^2).
    // Lines: 100 Hz = line 64, 250 Hz = line 160; both on lines. Tolerance 1e-4: float32 and
    // the few 1e-6 of a Hann tone's power outside +-8 lines.
    const g = 9.80665;
    const x = sine(FRAME, 100, RATE_HZ, 0.5);
    const s2 = sine(FRAME, 250, RATE_HZ, 1.2, 1);
    const out1 = sine(FRAME, 5, RATE_HZ, 0.01, 2);
    const out2 = sine(FRAME, 2000, RATE_HZ, 3, 0.5);
    // Just outside each edge: 7.8125 Hz (line 5) and 1003.125 Hz (line 642). A tone on a line
    // reaches only the lines beside it through the Hann window (lines 4..6 = 6.25..9.375 Hz and
    // 641..643 = 1001.6..1004.7 Hz), all outside 10..1000 Hz; counted, 0.9 g at 7.8 Hz alone
    // would add about 130 mm/s RMS.
    const out3 = sine(FRAME, 7.8125, RATE_HZ, 0.9, 0.3);
    const out4 = sine(FRAME, 1003.125, RATE_HZ, 2, 0.7);
    for (let i = 0; i < FRAME; i++) x[i] += s2[i] + out1[i] + out2[i] + out3[i] + out4[i];
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

  it('zoneOf rejects NaN and negative RMS, and boundaries that do not increase', () => {
    const b: [number, number, number] = [1.4, 2.8, 4.5];
    expect(() => zoneOf(Number.NaN, b)).toThrow(/velocity RMS must be a finite number >= 0 mm\/s, got NaN/);
    expect(() => zoneOf(-1, b)).toThrow(/got -1/);
    expect(() => zoneOf(1, [2.8, 1.4, 4.5])).toThrow(/zone boundaries must be finite, positive and increasing, got \[2.8, 1.4, 4.5\]/);
  });
});
