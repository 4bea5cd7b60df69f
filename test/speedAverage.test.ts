import { describe, expect, it } from 'vitest';
import { SpeedAverage } from '../src/manipulation/speedAverage.ts';
import type { SpeedPoint } from '../src/manipulation/speedPoint.ts';

/** Revolutions of a shaft at constant rpm whose edge times carry the given errors (s). */
function revolutions(rpm: number, edgeErrorsS: number[]): SpeedPoint[] {
  const periodS = 60 / rpm;
  const edges = edgeErrorsS.map((e, i) => i * periodS + e);
  return edges.slice(1).map((t, i) => ({ tS: t, rpm: 60 / (t - edges[i]), confidence: 1, source: 'tach' as const }));
}

describe('tach speed averaged over revolutions', () => {
  it('divides the jitter of alternating edge errors by the number of revolutions', () => {
    // 852 rpm, edges off by +/- 0.2 ms alternately (about half a sample at 2560 Hz): one
    // revolution reads 852 x (1 -/+ 0.4 ms / 70.4 ms); over 4 revolutions the end errors are
    // equal and cancel (hand calculation).
    const errors = Array.from({ length: 12 }, (_, i) => (i % 2 === 0 ? 2e-4 : -2e-4));
    const avg = new SpeedAverage(4);
    const out = revolutions(852, errors).map((p) => avg.push(p));
    for (const p of out.slice(4)) expect(Math.abs(p.rpm - 852)).toBeLessThan(1e-9);
    const raw = revolutions(852, errors);
    expect(Math.abs(raw[0].rpm - 852)).toBeGreaterThan(4);
  });

  it('stamps the average at the middle of its span, so a ramp is not delayed', () => {
    // Constant angular acceleration: the mean speed over a span is the speed at its middle time.
    const alpha = 2; // rev/s^2
    const edges: number[] = [];
    for (let n = 0; n <= 10; n++) edges.push((-10 + Math.sqrt(100 + 2 * alpha * n)) / alpha); // 10 rev/s at t=0
    const avg = new SpeedAverage(4);
    let last: SpeedPoint | null = null;
    for (let i = 1; i < edges.length; i++) last = avg.push({ tS: edges[i], rpm: 60 / (edges[i] - edges[i - 1]), confidence: 1, source: 'tach' });
    const expectedRpm = 60 * (10 + alpha * last!.tS);
    expect(Math.abs(last!.rpm - expectedRpm)).toBeLessThan(0.05);
  });

  it('restarts after a gap instead of averaging across it', () => {
    const avg = new SpeedAverage(4);
    avg.push({ tS: 1.0, rpm: 600, confidence: 1, source: 'tach' });
    avg.push({ tS: 1.1, rpm: 600, confidence: 1, source: 'tach' });
    const after = avg.push({ tS: 5.0, rpm: 900, confidence: 1, source: 'tach' });
    expect(after.rpm).toBe(900);
  });

  it('refuses a revolution count that is not a whole number of at least one', () => {
    expect(() => new SpeedAverage(0)).toThrow(/whole number/);
    expect(() => new SpeedAverage(2.5)).toThrow(/whole number/);
  });
});
