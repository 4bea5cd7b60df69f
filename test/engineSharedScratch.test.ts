/**
 * Engines share scratch to save memory (the spectra's output arrays and a velocity spectrum per
 * engine; the decimators' work buffers, their output scratch and the newest power spectrum per
 * process). Nothing of one sensor or asset may reach another through it:
 *  - two sensors of one asset, one fed 0.3 times the other's signal, read broadband severities
 *    in that ratio (the analysis is linear in its input: a leak of one sensor's
 *    spectrum into the other's reading breaks the ratio);
 *  - two assets of different frame sizes and speed sources (tach; tachless on its sensor's own
 *    spectrum) driven block by block in turn in one thread, as a worker hosts them, give the
 *    records each gives driven alone.
 */
import { beforeAll, describe, expect, it } from 'vitest';
import type { EngineRecord } from '../src/advisory/records.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../src/config/types.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';
import { chirpSignal } from './support/chirp.ts';
import { simulateRun } from './support/liveRig.ts';

const MAP = `site: t
assets:
  - id: pump
    procedure: "Test procedure"
    speed: { source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [450, 1200] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: vane-pass, multiple: 5 }
    sensors:
      - { id: top, channel: 0, units: g }
      - { id: side, channel: 2, units: g }
    components:
      - { id: reed, fn_hz: 14.2, q: 8, orders: [1x] }
    alarm: { on_delay_s: 5, off_delay_s: 5, deadband_pct: 1, priority: high }
  - id: fan
    procedure: "Test procedure"
    speed: { source: spectrum, sensor: bearing, range_rpm: [450, 1200] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: 2x, multiple: 2 }
    sensors:
      - { id: bearing, channel: 0, units: g }
    analysis: { frame_size: 8192, overlap: 0.5, averages: 4 }
    components:
      - { id: panel, fn_hz: 14, q: 10, orders: [1x] }
    alarm: { on_delay_s: 5, off_delay_s: 5, deadband_pct: 1, priority: high }
`;

const PROFILE = `
sample_rate_hz: 2560
start_rpm: 780
segments:
  - { hold_s: 4 }
  - { ramp_to_rpm: 852, over_s: 4 }
  - { hold_s: 12 }
forcing: { 1x: 0.02, vane-pass: 0.01 }
noise_g: 0.002
seed: 5
`;
const FS = 2560;
const RATIO = 0.3;

describe('scratch shared by sensors and engines', () => {
  let pump: AssetConfig;
  let fan: AssetConfig;
  let ffts: Map<number, RealFft>;
  let pumpData: Float32Array[];
  let fanData: Float32Array;

  beforeAll(async () => {
    const { map, problems } = parseAssetMap(MAP, 'test map');
    if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
    [pump, fan] = map.assets;
    ffts = new Map();
    for (const a of [pump, fan]) ffts.set(a.analysis.frameSize, await createRealFft(a.analysis.frameSize));
    const run = simulateRun(pump, PROFILE);
    const side = Float32Array.from(run.channels[0], (v) => RATIO * v);
    pumpData = [run.channels[0], run.channels[1], side];
    fanData = chirpSignal({
      profile: { startHz: 11, segments: [{ durS: 6, toHz: 11 }, { durS: 6, toHz: 16 }, { durS: 8, toHz: 16 }] },
      rateHz: FS,
      refHz: 15,
      orders: [{ multiple: 1, peakG: 0.02, scaling: 'speed2' }, { multiple: 2, peakG: 0.006, scaling: 'speed2' }],
      noiseG: 0.002,
      seed: 9,
    });
  });

  const engine = (a: AssetConfig) => new AssetEngine(a, { fft: ffts.get(a.analysis.frameSize) as RealFft }, { statusEveryS: 1 });
  /** Pushes of one block each: [engine index, channel, start sample]. */
  const feeds = (block: number, which: number[]): Array<[number, number, number]> => {
    const out: Array<[number, number, number]> = [];
    const n = Math.min(pumpData[0].length, fanData.length);
    for (let s = 0; s < n; s += block) {
      if (which.includes(0)) for (const ch of [0, 2, 1]) out.push([0, ch, s]);
      if (which.includes(1)) out.push([1, 0, s]);
    }
    return out;
  };
  const drive = (engines: AssetEngine[], plan: Array<[number, number, number]>, block: number): EngineRecord[][] => {
    const out: EngineRecord[][] = engines.map(() => []);
    for (const [e, ch, s] of plan) {
      const src = e === 0 ? pumpData[ch] : fanData;
      out[e].push(...engines[e].pushChannel(ch, s / FS, FS, src.subarray(s, s + block)));
    }
    engines.forEach((en, i) => out[i].push(...en.finish()));
    return out;
  };

  it('reads a sensor fed 0.3 x another at 0.3 x its severity, status after status', () => {
    const [records] = drive([engine(pump)], feeds(1000, [0]), 1000);
    let compared = 0;
    for (const r of records) {
      if (r.kind !== 'status') continue;
      const top = r.severity.find((s) => s.sensor === 'top');
      const side = r.severity.find((s) => s.sensor === 'side');
      if (!top || !side) continue;
      expect(side.velocity_rms_mm_s / top.velocity_rms_mm_s).toBeCloseTo(RATIO, 5);
      compared++;
    }
    expect(compared).toBeGreaterThan(8);
  });

  it('gives two assets driven in turn in one thread the records each gives alone', () => {
    const block = 777;
    const [pumpAlone] = drive([engine(pump)], feeds(block, [0]), block);
    const [, fanAlone] = drive([engine(pump), engine(fan)], feeds(block, [1]), block);
    const [pumpTurns, fanTurns] = drive([engine(pump), engine(fan)], feeds(block, [0, 1]), block);
    expect(pumpAlone.filter((r) => r.kind === 'status').length).toBeGreaterThan(8);
    expect(fanAlone.some((r) => r.kind === 'status' && r.speed_rpm !== null)).toBe(true);
    expect(pumpTurns).toEqual(pumpAlone);
    expect(fanTurns).toEqual(fanAlone);
  });
});
