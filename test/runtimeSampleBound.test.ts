/**
 * The live agent holds samples to the bound a recording's samples have (+-1e6, recordingLimits.ts):
 * a block with one finite sample beyond it is dropped whole and counted, like a NaN block, where
 * replay treats the same values as missing data.
 */
import { describe, expect, it } from 'vitest';
import { benchMapText, benchTopics } from '../bench/benchStream.ts';
import { encodeSampleBlockBinary } from '../src/acquisition/samplePayload.ts';
import { AssetRuntime } from '../src/agent/assetRuntime.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';

describe('live samples beyond +-1e6', () => {
  it('drop the block as sample_out_of_range and count it; the bound itself passes', async () => {
    const prefix = 'qbound';
    const { map } = parseAssetMap(benchMapText({ prefix, brokerUrl: 'mqtt://127.0.0.1:1', channels: 1, onDelayS: 2, offDelayS: 2 }), 'bound map');
    if (!map) throw new Error('map not valid');
    const runtime = new AssetRuntime(map.assets[0], map.agent, prefix, await createRealFft(map.assets[0].analysis.frameSize));
    const topic = benchTopics(prefix, 1).samples[0];
    const tS = 1_000_000;
    const nowMs = (tS + 1) * 1000;
    const block = (seq: number, x: number) => {
      const samples = new Float32Array(2560).fill(0.01);
      samples[7] = x;
      return encodeSampleBlockBinary({ tS: tS + seq * 0.1, sampleRateHz: 25_600, seq, samples });
    };
    const beyond = runtime.onMessage(topic, block(0, 1.5e6), nowMs);
    expect(beyond.drops.map((d) => d.reason)).toEqual(['sample_out_of_range']);
    expect(beyond.drops[0].detail).toMatch(/sample 7 of 2560 is 1500000, beyond \+-1000000/);
    const atBound = runtime.onMessage(topic, block(1, -1e6), nowMs);
    expect(atBound.drops).toEqual([]);
    const counters = runtime.counterValues();
    expect(counters.drop_sample_out_of_range).toBe(1);
    expect(counters.blocks_received).toBe(2);
  });
});
