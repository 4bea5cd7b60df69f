/**
 * Drives qband's engine over a swept-mode signal (test/support/sweptModes.ts) as replay would,
 * block by block, and collects the transient records it completes.
 */
import type { EngineRecord } from '../../src/advisory/records.ts';
import { parseAssetMap } from '../../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../../src/config/types.ts';
import { AssetEngine } from '../../src/engine/assetEngine.ts';
import { createRealFft } from '../../src/manipulation/realFft.ts';
import type { TransientRecord } from '../../src/transients/transientRecord.ts';

export function assetFromYaml(yaml: string): AssetConfig {
  const parsed = parseAssetMap(yaml, 'test-map.yaml');
  if (!parsed.map) throw new Error(`test map invalid: ${parsed.problems.map((p) => p.message).join('; ')}`);
  return parsed.map.assets[0];
}

export async function engineTransients(
  asset: AssetConfig,
  channels: Float32Array[],
  sampleRateHz: number,
  blockFrames = 1024,
): Promise<{ transients: TransientRecord[]; records: EngineRecord[] }> {
  const engine = new AssetEngine(asset, { fft: await createRealFft(asset.analysis.frameSize, 'pffft') });
  const records: EngineRecord[] = [];
  for (let i = 0; i < channels[0].length; i += blockFrames) {
    records.push(...engine.pushBlock(i / sampleRateHz, sampleRateHz, channels.map((c) => c.subarray(i, i + blockFrames))));
  }
  records.push(...engine.finish());
  return { transients: records.filter((r): r is TransientRecord => r.kind === 'transient'), records };
}
