/**
 * Transient capture measures its order and decay windows only when a record may read them
 * (sensorCapture.ts, transientCapture.ts): steps fall due as the data comes, wait, and are then
 * measured (a sweep under way or waiting for its tail), measured anyway after a second, or
 * dropped (centred before the earliest time a record can still read). A window measured late
 * must give the very numbers it gives at once, although index 0 of the queues (and the time
 * every index is counted from) moves on while it waits. Here one capture measures every step as
 * it falls due and another lets them wait, over a minute of a ramping shaft (dozens of moves of
 * index 0) with a gap in the middle; equal means Object.is, row by row.
 */
import { describe, expect, it } from 'vitest';
import { soakMap } from '../bench/soakMap.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { SensorConfig } from '../src/config/types.ts';
import { SensorCapture } from '../src/transients/sensorCapture.ts';
import { IntegratedAngle } from '../src/transients/shaftAngles.ts';

const FS = 25_600;
const BLOCK = 2560;
const SECONDS = 60;

function sensor(): SensorConfig {
  const { map, problems } = parseAssetMap(soakMap('t', 'mqtt://127.0.0.1:1883', 1), 'test map');
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  return map.assets[0].sensors[0];
}

/** Speed (rpm): holds, ramps up, holds, coasts down: every order moves through the window's frequencies. */
function rpm(t: number): number {
  if (t < 10) return 900;
  if (t < 30) return 900 + 40 * (t - 10);
  if (t < 40) return 1700;
  return 1700 - 30 * (t - 40);
}

function newCapture(): SensorCapture {
  // Whole orders, a fractional one, and two components with their own decay windows.
  const orders = [
    { id: '1x', multiple: 1 },
    { id: 'blade', multiple: 7 },
    { id: 'bearing', multiple: 3.62 },
  ];
  const components = [
    { id: 'reed', fnHz: 24.5, windowS: 0.3 },
    { id: 'panel', fnHz: 61.2, windowS: 0.16 },
  ];
  return new SensorCapture(sensor(), orders, components, 0.3, 10 * ((7 * 1800 * 1.1) / 60));
}

/** Blocks of a 1X, a blade pass and two ringing components over a little noise (a fixed generator). */
function* blocks(): Generator<{ t0: number; x: Float32Array }> {
  let seed = 12345;
  const noise = (): number => {
    seed = (seed * 1103515245 + 12345) % 2147483648;
    return seed / 2147483648 - 0.5;
  };
  let rev = 0;
  for (let b = 0; b < SECONDS * 10; b++) {
    const t0 = b * 0.1;
    const x = new Float32Array(BLOCK);
    for (let i = 0; i < BLOCK; i++) {
      const t = t0 + i / FS;
      rev += rpm(t) / 60 / FS;
      x[i] = 0.05 * Math.sin(2 * Math.PI * rev) + 0.02 * Math.sin(14 * Math.PI * rev) + 0.01 * Math.sin(2 * Math.PI * 24.5 * t) + 0.005 * Math.sin(2 * Math.PI * 61.2 * t) + 0.002 * noise();
    }
    yield { t0, x };
  }
}

/** Every row of a capture's order and decay tables, as [table, centre, values...]. */
function rows(c: SensorCapture): number[][] {
  const out: number[][] = [];
  const tables = [...c.orderRows, ...c.decayRows];
  tables.forEach((t, k) => {
    for (let r = 0; r < t.length; r++) out.push([k, ...Array.from({ length: k < c.orderRows.length ? 4 : 3 }, (_, col) => t.at(r, col))]);
  });
  return out;
}

function sameRow(a: number[], b: number[]): boolean {
  return a.length === b.length && a.every((v, i) => Object.is(v, b[i]));
}

/**
 * Runs an eager capture (every step measured as it falls due) beside a deferred one driven by
 * `drive` (its readFromS, and whether to measure what waits, at each step); a gap at 33 s.
 */
function runPair(drive: (tS: number) => { readFromS: number; measure: boolean }): { eager: SensorCapture; deferred: SensorCapture } {
  const eager = newCapture();
  const deferred = newCapture();
  const angles = [new IntegratedAngle(), new IntegratedAngle()];
  for (const a of angles) a.speedAt = (t) => rpm(t);
  for (const { t0, x } of blocks()) {
    if (t0 === 33) {
      eager.forget();
      deferred.forget();
      for (const a of angles) a.reset();
    }
    eager.push(t0, FS, x);
    deferred.push(t0, FS, x);
    // The speed is known up to the end of the block.
    eager.advanceTo(t0 + 0.1, angles[0], false);
    const { readFromS, measure } = drive(t0 + 0.1);
    deferred.advanceTo(t0 + 0.1, angles[1], false, readFromS, false);
    if (measure) deferred.measureDue(readFromS);
  }
  eager.measureDue(-Infinity);
  deferred.measureDue(drive(SECONDS).readFromS);
  return { eager, deferred };
}

describe('transient capture, steps measured when they are read', () => {
  it('gives the same rows bit for bit when its steps wait, with a gap in the data, however long they wait', () => {
    // Measured every 1 to 13 steps (up to 1.3 s: some wait the longest a step may and are measured anyway).
    let k = 0;
    const waits = [1, 4, 13, 2, 7, 11, 3];
    let next = 0;
    const { eager, deferred } = runPair(() => {
      const measure = k++ === next;
      if (measure) next = k + waits[k % waits.length];
      return { readFromS: -Infinity, measure };
    });
    const a = rows(eager);
    const b = rows(deferred);
    // A minute of data: order windows every 75 ms (a quarter of the 0.3 s window) for three
    // orders, about 2,400 rows less those cut by the gap and the first and last half windows,
    // and decay windows besides. At 25600 / 11 Hz decimated, index 0 moved on every 4096
    // samples (1.76 s) or so, dozens of times while steps waited.
    expect(a.length).toBeGreaterThan(1500);
    expect(b.length).toBe(a.length);
    for (let i = 0; i < a.length; i++) if (!sameRow(a[i], b[i])) expect(b[i]).toEqual(a[i]);
  });

  it('never measures a step centred before the earliest time a record can read, and measures the rest as the eager capture does', () => {
    // A record may read from 0.5 s back while the speed holds; from 20.4 s on, a sweep is under
    // way and every step is measured until it is recorded at 26 s.
    const readFrom = (t: number): number => (t >= 20.4 && t <= 26 ? 20.4 - 0.5 : t - 0.5);
    const { eager, deferred } = runPair((t) => ({ readFromS: readFrom(t), measure: t >= 20.4 && t <= 26 }));
    const a = rows(eager);
    const b = rows(deferred);
    const key = (r: number[]): string => `${r[0]} ${r[1]}`;
    const byKey = new Map(a.map((r) => [key(r), r]));
    for (const r of b) {
      const same = byKey.get(key(r));
      expect(same && sameRow(same, r)).toBe(true);
      // Nothing outside the sweep, but for what waited when the data stopped (the gap, the end): forget() and the last call measure it.
      const t = r[1];
      expect((t >= 19.9 && t <= 26) || (t >= 32.4 && t <= 33) || t >= 59.4).toBe(true);
    }
    // Every step of the sweep is there: 5.6 s of order windows every 75 ms for three orders
    // (about 220 rows) and decay windows besides.
    const wanted = a.filter((r) => r[1] >= 19.9 && r[1] <= 25.5);
    expect(wanted.length).toBeGreaterThan(200);
    const got = new Set(b.map(key));
    for (const r of wanted) expect(got.has(key(r))).toBe(true);
    // The sweep, the gap's last half second and the end's: under a fifth of the minute.
    expect(b.length).toBeLessThan(a.length / 5);
  });
});
