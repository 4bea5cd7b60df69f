/**
 * The live bench's blocks pushed straight into the agent's parts in this process, with no
 * broker: `engine` decodes and calls the engine as the runtime does; `runtime` hands the
 * payloads to AssetRuntime.onMessage (which also sequences, counts and writes state and alarm
 * JSON). Nothing is published. The live runs are measured against these.
 */
import { SamplePool } from '../src/acquisition/samplePool.ts';
import { DEFAULT_MAX_SAMPLES_PER_BLOCK, decodeSampleBlock } from '../src/acquisition/samplePayload.ts';
import { AssetRuntime } from '../src/agent/assetRuntime.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig, SiteMap } from '../src/config/types.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import type { RealFft } from '../src/manipulation/realFft.ts';
import { BLOCK_S, IN_BAND_RPM, benchMapText, benchTopics, periodStartS, poolIndex, speedPayload, stampBlock } from './benchStream.ts';
import { cpuS, wallMs } from './liveRig.ts';
import type { Segment } from './liveRun.ts';

function parseBenchMap(channels: number, prefix: string, delays: { onDelayS: number; offDelayS: number }): { map: SiteMap; asset: AssetConfig } {
  const text = benchMapText({ prefix, brokerUrl: 'mqtt://127.0.0.1:1', channels, ...delays });
  const { map, problems } = parseAssetMap(text, 'bench map');
  if (!map) throw new Error(`bench map is not valid:\n${problems.map((p) => p.message).join('\n')}`);
  return { map, asset: map.assets[0] };
}

/**
 * The live run's blocks pushed straight in: `engine` decodes and calls the engine as the
 * runtime does; `runtime` hands the payloads to AssetRuntime.onMessage (which also sequences,
 * counts and writes state and alarm JSON). Nothing is published.
 */
export function localRun(
  level: 'engine' | 'runtime',
  channels: number,
  periods: number,
  segmentPeriods: number,
  pool: Uint8Array[],
  fft: RealFft,
  delays: { onDelayS: number; offDelayS: number },
): Segment[] {
  const prefix = 'qbench-local';
  const { map, asset } = parseBenchMap(channels, prefix, delays);
  const topics = benchTopics(prefix, channels);
  const t0S = Date.now() / 1000 - periods * BLOCK_S - 10;
  const limits = { maxSamples: DEFAULT_MAX_SAMPLES_PER_BLOCK };
  const pool_ = new SamplePool(); // as the runtime decodes
  const engine = level === 'engine' ? new AssetEngine(asset, { fft }, { statusEveryS: map.agent.stateEveryS }) : null;
  const runtime = level === 'runtime' ? new AssetRuntime(asset, map.agent, prefix, fft) : null;
  let sink = 0;
  const segments: Segment[] = [];
  let mark = { cpuS: cpuS(), wallS: wallMs() / 1000 };
  for (let k = 0; k < periods; k++) {
    const startS = periodStartS(t0S, k);
    const endS = periodStartS(t0S, k + 1);
    if (engine) sink += engine.pushSpeed({ tS: endS, rpm: IN_BAND_RPM, confidence: 1, source: 'topic' }).length;
    else sink += (runtime as AssetRuntime).onMessage(topics.speed, Buffer.from(speedPayload(endS, IN_BAND_RPM)), Date.now()).out.length;
    for (let c = 0; c < channels; c++) {
      const payload = stampBlock(pool[poolIndex(k, c)], k, startS);
      if (engine) {
        const d = decodeSampleBlock(payload, { ...limits, samples: pool_.take });
        if (!d.ok) throw new Error(`bench block refused: ${d.detail}`);
        sink += engine.pushChannel(c, d.block.tS, d.block.sampleRateHz, d.block.samples).length;
        pool_.give(d.block.samples);
      } else {
        sink += (runtime as AssetRuntime).onMessage(topics.samples[c], payload, Date.now()).out.length;
      }
    }
    if ((k + 1) % segmentPeriods === 0) {
      const now = { cpuS: cpuS(), wallS: wallMs() / 1000 };
      segments.push({ cpuS: now.cpuS - mark.cpuS, wallS: now.wallS - mark.wallS, handlerS: 0 });
      mark = now;
    }
  }
  if (!Number.isFinite(sink)) throw new Error('non-finite result');
  return segments;
}
