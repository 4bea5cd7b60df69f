import { readFileSync } from 'node:fs';
import { beforeAll, describe, expect, it } from 'vitest';
import type { AlarmRecord, EngineRecord } from '../src/advisory/records.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../src/config/types.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';
import { simulateRun } from './support/liveRig.ts';

// Event time means the records depend on the data only: not on how it was cut into blocks, nor
// on which channel's block arrived first (a live stream delivers channels separately).
const PROFILE = `
sample_rate_hz: 2560
start_rpm: 780
segments:
  - { hold_s: 4 }
  - { ramp_to_rpm: 852, over_s: 4 }
  - { hold_s: 40 }
  - { ramp_to_rpm: 960, over_s: 4 }
  - { hold_s: 14 }
forcing: { 1x: 0.02, vane-pass: 0.01 }
noise_g: 0.002
seed: 5
`;

function demoAsset(): AssetConfig {
  const text = readFileSync(new URL('../config/demo-map.yaml', import.meta.url), 'utf8');
  return parseAssetMap(text, 'demo-map.yaml').map!.assets[0];
}

describe('engine records do not depend on how the data arrives', () => {
  let asset: AssetConfig;
  let fft: RealFft;
  let data: { fs: number; channels: Float32Array[] };
  let reference: EngineRecord[];

  const runBlocks = (frames: number) => {
    const engine = new AssetEngine(asset, { fft }, { statusEveryS: 2 });
    const out: EngineRecord[] = [];
    for (let start = 0; start < data.channels[0].length; start += frames) {
      const slice = data.channels.map((ch) => ch.subarray(start, start + frames));
      out.push(...engine.pushBlock(start / data.fs, data.fs, slice));
    }
    return out;
  };

  beforeAll(async () => {
    asset = demoAsset();
    fft = await createRealFft(asset.analysis.frameSize);
    data = simulateRun(asset, PROFILE);
    reference = runBlocks(8192);
  });

  it('raises and clears in this run at all (so the comparisons below compare something)', () => {
    const events = reference.filter((r) => r.kind === 'alarm').map((r) => (r.kind === 'alarm' ? r.event : ''));
    expect(events).toEqual(['raise', 'clear']);
  });

  it('gives the same records for blocks of 8192, 1000 and 37 frames', () => {
    expect(runBlocks(1000)).toEqual(reference);
    expect(runBlocks(37)).toEqual(reference);
  });

  it('gives the same records when the tach channel runs seconds ahead of the sensor, block by block', () => {
    const engine = new AssetEngine(asset, { fft }, { statusEveryS: 2 });
    const out: EngineRecord[] = [];
    const frames = 2048;
    const leadBlocks = 6; // the tach arrives about 5 s early
    const n = data.channels[0].length;
    const blocks = Math.ceil(n / frames);
    for (let b = 0; b < blocks + leadBlocks; b++) {
      const tachStart = b * frames;
      if (tachStart < n) out.push(...engine.pushChannel(1, tachStart / data.fs, data.fs, data.channels[1].subarray(tachStart, tachStart + frames)));
      const sensorStart = (b - leadBlocks) * frames;
      if (sensorStart >= 0 && sensorStart < n) {
        out.push(...engine.pushChannel(0, sensorStart / data.fs, data.fs, data.channels[0].subarray(sensorStart, sensorStart + frames)));
      }
    }
    expect(out).toEqual(reference);
  });
});

describe('engine on epoch timestamps', () => {
  it('decides as soon as the data arrives, as it does on small timestamps (no rounding wait)', async () => {
    const asset = demoAsset();
    const fft = await createRealFft(asset.analysis.frameSize);
    const data = simulateRun(asset, PROFILE);
    // The profile's speed as a known series (piecewise linear, from PROFILE above), so decisions
    // may go right up to the end of each block.
    const rpmAt = (t: number) => (t < 4 ? 780 : t < 8 ? 780 + 18 * (t - 4) : t < 48 ? 852 : t < 52 ? 852 + 27 * (t - 48) : 960);
    // Which 0.1 s block's arrival produced the raise (every block end is a decision time).
    const raiseAt = (t0S: number) => {
      const speedSeries = Array.from({ length: 1400 }, (_, i) => ({ tS: t0S + i * 0.05, rpm: rpmAt(i * 0.05), confidence: 1, source: 'series' as const }));
      const engine = new AssetEngine(asset, { fft }, { speedSeries });
      const frames = 256;
      for (let k = 0, start = 0; start < data.channels[0].length; k++, start += frames) {
        const slice = data.channels.map((ch) => ch.subarray(start, start + frames));
        const raise = engine.pushBlock(t0S + start / data.fs, data.fs, slice).find((r): r is AlarmRecord => r.kind === 'alarm' && r.event === 'raise');
        if (raise) return { block: k, relS: raise.t_s - t0S };
      }
      throw new Error('no raise');
    };
    const small = raiseAt(0);
    // 1.8e9 s: a date in 2027, where one step of a double is 2.4e-7 s.
    const epoch = raiseAt(1_800_000_000);
    expect(epoch.block, `raise came with block ${epoch.block} on epoch time, ${small.block} on small times`).toBe(small.block);
    expect(Math.abs(epoch.relS - small.relS)).toBeLessThan(1e-5);
  });
});

describe('engine with a scaled sensor', () => {
  it('reads the same amplitudes from raw samples in another scale (raw x scale = units)', async () => {
    const asset = demoAsset();
    const scaled: AssetConfig = { ...asset, sensors: asset.sensors.map((s) => ({ ...s, scale: 4 })) };
    const fft = await createRealFft(asset.analysis.frameSize);
    // The simulator writes raw = value / scale, so both runs carry the same physical signal.
    const evidence = (a: AssetConfig) => {
      const data = simulateRun(a, PROFILE);
      const engine = new AssetEngine(a, { fft });
      const out = [];
      // Blocks of 1000 frames: the scaled path reuses one buffer from block to block.
      for (let start = 0; start < data.channels[0].length; start += 1000) {
        out.push(...engine.pushBlock(start / data.fs, data.fs, data.channels.map((ch) => ch.subarray(start, start + 1000))));
      }
      const raise = out.find((r): r is AlarmRecord => r.kind === 'alarm' && r.event === 'raise');
      if (!raise || raise.kind !== 'alarm') throw new Error('no raise');
      return raise;
    };
    const plain = evidence(asset);
    const other = evidence(scaled);
    expect(other.t_s).toBe(plain.t_s);
    // float32 rounding of raw / 4 is exact (a power of two), so the spectra agree closely.
    expect(Math.abs(other.amplitude!.velocity_rms_mm_s / plain.amplitude!.velocity_rms_mm_s - 1)).toBeLessThan(1e-6);
  });
});
