import { describe, expect, it } from 'vitest';
import { benchMapText, benchTopics, blockPool, IN_BAND_RPM, periodStartS, poolIndex, speedPayload, stampBlock } from '../bench/benchStream.ts';
import { decodeSampleBlock, encodeSampleBlockBinary } from '../src/acquisition/samplePayload.ts';
import { SamplePool } from '../src/acquisition/samplePool.ts';
import { AssetRuntime } from '../src/agent/assetRuntime.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';

describe('sample pool', () => {
  it('hands an array back out only after it was given back, and the decoder overwrites it whole', () => {
    const pool = new SamplePool();
    const a = pool.take(4);
    expect(pool.take(4)).not.toBe(a);
    a.set([9, 9, 9, 9]);
    pool.give(a);
    const block = encodeSampleBlockBinary({ tS: 1, sampleRateHz: 100, seq: 0, samples: Float32Array.of(1, 2, 3, 4) });
    const d = decodeSampleBlock(block, { maxSamples: 100, samples: pool.take });
    expect(d.ok && d.block.samples).toBe(a);
    expect(d.ok && Array.from(d.block.samples)).toEqual([1, 2, 3, 4]);
  });

  it('gives the same alarm records when blocks arrive out of order and are held (their arrays kept until delivered)', async () => {
    const channels = 3;
    const prefix = 'qpool';
    const { map } = parseAssetMap(benchMapText({ prefix, brokerUrl: 'mqtt://127.0.0.1:1', channels, onDelayS: 2, offDelayS: 2 }), 'pool map');
    if (!map) throw new Error('map not valid');
    const fft = await createRealFft(map.assets[0].analysis.frameSize);
    const topics = benchTopics(prefix, channels);
    const pool = blockPool();
    const t0S = 1_000_000;
    const nowMs = (t0S + 100) * 1000;
    const periods = 60;
    const run = (swap: boolean): string[] => {
      const runtime = new AssetRuntime(map.assets[0], map.agent, prefix, fft);
      const alarms: string[] = [];
      const keep = (r: { out: Array<{ topic: string; payload: string | Buffer }> }): void => {
        for (const o of r.out) if (o.topic === topics.alarm) alarms.push(String(o.payload));
      };
      for (let k = 0; k < periods; k++) {
        keep(runtime.onMessage(topics.speed, Buffer.from(speedPayload(periodStartS(t0S, k + 1), IN_BAND_RPM)), nowMs));
        for (let c = 0; c < channels; c++) {
          // With swap, each channel's blocks of periods 2j and 2j+1 (j >= 1, once the stream has
          // started: the first block received starts it) arrive the other way round.
          const p = swap && k >= 2 ? (k % 2 === 0 ? k + 1 : k - 1) : k;
          const payload = stampBlock(pool[poolIndex(p, c)].slice(), p, periodStartS(t0S, p));
          keep(runtime.onMessage(topics.samples[c], payload, nowMs));
        }
      }
      return alarms;
    };
    const inOrder = run(false);
    expect(inOrder.length).toBeGreaterThan(0); // the on-delay completes inside the run: a raise
    expect(run(true)).toEqual(inOrder);
  });
});
