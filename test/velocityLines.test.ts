/**
 * The engine converts to velocity only the lines its measurements read (sensorAnalysis.ts): the
 * severity band (10 to 1000 Hz, ISO 20816) and each order's search window with the line beyond.
 * Here the velocity array the sensors share is filled with a huge value first (a comparison with
 * NaN would be false and hide the read): a measurement that read a line left unconverted would
 * change. Each is compared with the same sensor over a clean array, and with the whole spectrum
 * converted the way it was before (every line), bit for bit.
 * The spectrum is made up for the test: a full-rate frame (25.6 kHz, 8192 points, 4097 lines of
 * 3.125 Hz) of random lines with tones at the orders of a shaft inside the soak map's range.
 */
import { describe, expect, it } from 'vitest';
import { soakMap } from '../bench/soakMap.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { SensorAnalysis } from '../src/engine/sensorAnalysis.ts';
import { createFftJsRealFft } from '../src/manipulation/realFft.ts';
import { accelerationToVelocityMmS, interpolatePeak } from '../src/manipulation/spectrumMath.ts';
import { broadbandVelocityRmsMmS } from '../src/manipulation/velocitySeverity.ts';

const LINES = 4097;

function asset() {
  const { map, problems } = parseAssetMap(soakMap('t', 'mqtt://127.0.0.1:1883', 1), 'test map');
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  return map.assets[0];
}

/**
 * Random lines with a line standing out at 1X and 7X: on the order itself, or (edge) on the top
 * line of the window it is looked for in, with a line nearly as high just above it, which the
 * peak's interpolation reads.
 */
function frame(seed: number, shaftHz: number, rateHz: number, edge = false) {
  let s = seed;
  const rnd = (): number => {
    s = (s * 1103515245 + 12345) % 2147483648;
    return s / 2147483648;
  };
  const binHz = rateHz / 8192;
  const amplitude = Float64Array.from({ length: LINES }, () => 1e-4 * rnd());
  for (const k of [1, 7]) {
    const hz = k * shaftHz + (edge ? Math.max(2 * binHz, 0.02 * k * shaftHz) : 0);
    const line = edge ? Math.floor(hz / binHz + 1e-9) : Math.round(hz / binHz);
    if (line < LINES) amplitude[line] += 0.01 * k;
    // Just outside the window, a line high enough that the interpolation leans on it.
    if (edge && line + 1 < LINES) amplitude[line + 1] += 0.008 * k;
  }
  return { tEndS: 1, sampleRateHz: rateHz, binHz, amplitude, averagedFrames: 4 };
}

describe('velocity lines', () => {
  it('reads only converted lines: the same severity and order amplitudes as over a clean array and as converting every line', () => {
    const a = asset();
    const poisoned = new SensorAnalysis(a.sensors[0], a, createFftJsRealFft(8192), { velocity: new Float64Array(LINES).fill(1e300), outputPool: [] });
    const clean = new SensorAnalysis(a.sensors[0], a, createFftJsRealFft(8192), { velocity: new Float64Array(LINES), outputPool: [] });
    const warn = (): void => undefined;
    let checked = 0;
    // Shafts across the range (600 to 1800 rpm) and beyond; rates at which the band is whole and cut.
    for (const rateHz of [25_600, 3_200, 1_600]) {
      // 8500 rpm puts the blade pass (7X) at 992 Hz, its window past the band's top; 9000 at 1050 Hz.
      for (const [rpm, edge] of [600, 913, 1482, 1800, 2600, 8500, 9000].flatMap((r) => [[r, false], [r, true]] as const)) {
        const f = frame(rpm + rateHz, rpm / 60, rateHz, edge);
        poisoned.measure(f, rpm / 60, 0, warn);
        clean.measure(f, rpm / 60, 0, warn);
        // Every line converted, as before: the band's RMS and each order's peak.
        const full = new Float64Array(LINES);
        accelerationToVelocityMmS(f.amplitude, f.binHz, 'g', full);
        const hiHz = Math.min(1000, rateHz / 2);
        if (hiHz > 10) {
          const rms = broadbandVelocityRmsMmS(full, f.binHz, 10, hiHz);
          expect(poisoned.severity?.velocity_rms_mm_s).toBe(rms);
          expect(clean.severity?.velocity_rms_mm_s).toBe(rms);
        }
        a.orders.forEach((order, i) => {
          const orderHz = (order.multiple * rpm) / 60;
          if (orderHz >= 0.8 * (rateHz / 2)) {
            expect(poisoned.orderAmplitude[i]).toBeNaN();
            return;
          }
          const peak = interpolatePeak(full, f.binHz, orderHz, Math.max(2 * f.binHz, 0.02 * orderHz));
          expect(poisoned.orderAmplitude[i]).toBe(peak?.amplitude);
          expect(clean.orderAmplitude[i]).toBe(peak?.amplitude);
          expect(Number.isFinite(poisoned.orderAmplitude[i])).toBe(true);
          checked++;
        });
      }
    }
    // 3 rates x 7 speeds x 2 spectra x 2 orders, less those above 0.8 of half the rate.
    expect(checked).toBeGreaterThan(40);
  });
});
