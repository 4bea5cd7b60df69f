/**
 * A multi-asset run for the worker-pool tests: a map of four pumps built like the demo's (tach
 * and one accelerometer each, short delays), each fed its own simulated run with a raise and a
 * clear at its own time, cut into 0.25 s binary blocks and interleaved as a gateway would send
 * them. The runs differ in hold time and noise seed, so no two assets publish the same thing.
 */
import { parseAssetMap } from '../../src/config/parseAssetMap.ts';
import type { SiteMap } from '../../src/config/types.ts';
import { assetTopics } from '../../src/agent/topics.ts';
import type { RuntimeSpec } from '../../src/agent/workers/runtimeHost.ts';
import { blockMessages, interleave, shortRun, simulateRun } from './liveRig.ts';

export const POOL_ASSETS = ['pump-a', 'pump-b', 'pump-c', 'pump-d'];

const ASSET = (id: string) => `
  - id: ${id}
    speed: { source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [450, 1200] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: vane-pass, multiple: 5 }
    sensors:
      - { id: motor-top-x, channel: 0, units: g }
    components:
      - { id: motor-reed, fn_hz: 14.2, q: 8, orders: [1x] }
      - { id: discharge-pipe, fn_hz: 83.0, zeta: 0.03 }
    alarm: { on_delay_s: 3, off_delay_s: 2, deadband_pct: 1, priority: high }
    analysis: { frame_size: 2048 }`;

export function poolMapText(prefix: string, brokerUrl = 'mqtt://127.0.0.1:1'): string {
  return `site: pool-test\nbroker: { url: "${brokerUrl}", topic_prefix: ${prefix} }\nagent: { state_every_s: 1, stale_after_s: 2 }\nassets:${POOL_ASSETS.map(ASSET).join('')}\n`;
}

export function poolMap(prefix: string): { map: SiteMap; text: string } {
  const text = poolMapText(prefix);
  const { map, problems } = parseAssetMap(text, 'pool-map.yaml');
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  return { map, text };
}

/** liveRig.ts's short run with each asset's own first hold and noise seed. */
const RUNS = [shortRun(3, 9), shortRun(4.5, 21), shortRun(2, 33), shortRun(6, 47)];

export interface PoolMessage {
  asset: string;
  topic: string;
  payload: Buffer;
  /** The block's data end, s: the test stamps its arrival just after it. */
  endS: number;
}

/** Every asset's blocks, interleaved block by block across assets and channels. */
export function poolMessages(map: SiteMap, prefix: string, t0S: number): PoolMessage[] {
  const lists: PoolMessage[][] = map.assets.flatMap((asset, i) => {
    const topics = assetTopics(asset, prefix);
    const sim = simulateRun(asset, RUNS[i]);
    return [...topics.samples].map(([topic, input]) =>
      blockMessages(topic, sim.channels[input.channel], sim.fs, t0S).map((b) => ({ asset: asset.id, topic, payload: b.payload as Buffer, endS: b.tS + 0.25 })),
    );
  });
  return interleave(...lists);
}

export function poolSpecs(map: SiteMap, text: string, prefix: string): RuntimeSpec[] {
  return map.assets.map((asset) => ({ asset, agent: map.agent, prefix, mapText: text, stateDir: null }));
}
