/**
 * What transient capture holds per sensor while it runs: its sample queues keep only what the
 * next order and decay windows need (plus the block and decision step not yet measured), and
 * its measured rows only what a sweep or a decay tail can still use; neither grows with the
 * length of the run. Bounds are worked out here from the map (window, decimated rate, block,
 * step) and the queues' growth rule (an array at most 2.25 times the most it held).
 */
import { describe, expect, it } from 'vitest';
import { soakMap } from '../bench/soakMap.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { decimationFor } from '../src/transients/triangleDecimator.ts';
import { TransientCapture } from '../src/transients/transientCapture.ts';

const FS = 25_600;
const BLOCK = 2560;

// The soak's asset (bench/soakMap.ts: range 600-1800 rpm, 1X and a 7-blade pass, two components), two sensors.
const MAP = soakMap('t', 'mqtt://127.0.0.1:1883', 2);

function capture(): TransientCapture {
  const { map, problems } = parseAssetMap(MAP, 'test map');
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  return new TransientCapture(map.assets[0]);
}

/** Feeds `seconds` of both channels (a 1X tone at the speed's frequency) in 0.1 s blocks, stepping after each. */
function run(c: TransientCapture, fromS: number, seconds: number, rpm: (t: number) => number, sample: (heldAt: number) => void = () => undefined): void {
  const x = new Float32Array(BLOCK);
  for (let b = 0; b < seconds * 10; b++) {
    const t0 = fromS + b * 0.1;
    for (let i = 0; i < BLOCK; i++) x[i] = 0.05 * Math.sin((2 * Math.PI * rpm(t0) * (t0 + i / FS)) / 60);
    c.pushSamples(0, t0, FS, x);
    c.pushSamples(1, t0, FS, x);
    c.step(t0 + 0.1, rpm(t0 + 0.1), (t) => rpm(t), 'topic');
    sample(t0 + 0.1);
  }
}

describe('transient capture memory', () => {
  // Order window: 3 revolutions at 600 rpm = 0.3 s. Decimated rate: at least 10 x the top
  // frequency tracked (7 x 1800 rpm x 1.1 = 231 Hz), so 25600 / floor(25600 / 2310) Hz.
  const rateHz = FS / decimationFor(FS, 10 * ((7 * 1800 * 1.1) / 60));
  const need = Math.ceil((0.3 + 0.1 + 0.1) * rateHz); // window + one block + one step
  const queues = 2 + 2 * 2; // samples, angles, and per order two product queues

  it('keeps each sensor to what its windows need over a long steady run', () => {
    const c = capture();
    let most = 0;
    run(c, 1000, 120, () => 1200, () => {
      for (const h of c.heldDoubles()) most = Math.max(most, h.samples);
    });
    // Before release on every step the queues held up to 4096 samples past the windows (6144-long arrays).
    expect(most).toBeLessThanOrEqual(queues * Math.ceil(2.25 * need));
    for (const h of c.heldDoubles()) expect(h.samples).toBeGreaterThan(0);
  });

  it('keeps measured rows for a sweep in progress and lets them go once it is recorded', () => {
    const c = capture();
    // Steady, a run-up 900 -> 1700 rpm over 20 s, steady again.
    const rpm = (t: number): number => (t < 1030 ? 900 : t < 1050 ? 900 + 40 * (t - 1030) : 1700);
    let steady = 0;
    let sweeping = 0;
    let after = 0;
    let records = 0;
    const origStep = c.step.bind(c);
    c.step = (...a) => {
      const out = origStep(...a);
      records += out.length;
      return out;
    };
    run(c, 1000, 80, rpm, (t) => {
      const rows = Math.max(...c.heldDoubles().map((h) => h.rows));
      if (t > 1010 && t < 1030) steady = Math.max(steady, rows);
      if (t > 1049 && t < 1050) sweeping = rows;
      if (t > 1070) after = Math.max(after, rows);
    });
    expect(records).toBe(1);
    // Rows every quarter window per order (4 columns) and every half decay window per component
    // (3 columns), kept through the sweep: 20 s of them at least.
    const perS = 2 * 4 * (1 / 0.075) + 3 * (1 / (0.195 / 2) + 1 / (0.0286 / 2));
    expect(sweeping).toBeGreaterThan(20 * perS);
    // Outside a sweep: the hold, two windows and the decay tail (under 4 s) of rows, arrays at most 2.25 times that.
    expect(steady).toBeLessThanOrEqual(2.25 * 4 * perS + 7 * 64);
    expect(after).toBeLessThanOrEqual(2.25 * 4 * perS + 7 * 64);
  });
});
