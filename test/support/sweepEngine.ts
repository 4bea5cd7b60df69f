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
import type { SweepSpec } from './sweptModes.ts';

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

export const TACH_SPEED = '{ source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [900, 2100] }';
export const TACHLESS_SPEED = '{ source: spectrum, sensor: s, range_rpm: [900, 2100] }';

/** One asset `fan`: sensor s on channel 0 (g), the given speed source, orders and components. */
export function sweepMapYaml(speed: string, components: string, orders = '[{ id: 1x, multiple: 1 }]'): string {
  return `site: test-bench
assets:
  - id: fan
    procedure: test procedure
    speed: ${speed}
    orders: ${orders}
    sensors: [{ id: s, channel: 0, units: g }]
    components: ${components}
    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }
    analysis: { frame_size: 2048 }
`;
}

/** A run-up (or coast-down) of 1X through the given modes, 900 -> 2100 rpm, 2048 Hz, 6 s held at the end. */
export function sweepSpec(modes: SweepSpec['modes'], rampS: number, opts: Partial<SweepSpec> = {}): SweepSpec {
  return {
    sampleRateHz: 2048,
    durationS: rampS + 6,
    rpm0: 900,
    rpm1: 2100,
    rampS,
    multiple: 1,
    modes,
    scaleG: 0.001,
    noiseG: 0.0002,
    seed: 11,
    ...opts,
  };
}
