/**
 * The MQTT topics of one asset, from the map. Inputs default under the agent's prefix so a
 * small site needs to name nothing; a site whose gateways publish elsewhere names each topic
 * in the map. Outputs are always under the prefix: the agent publishes nowhere else.
 */
import type { AssetConfig } from '../config/types.ts';

export interface SampleInput {
  channel: number;
  role: 'sensor' | 'tach';
  /** Sensor id, or 'tach'. */
  id: string;
}

export interface AssetTopics {
  /** Sample-block topics and what each carries. */
  samples: Map<string, SampleInput>;
  /** Speed records (speed source `topic`). */
  speed: string | null;
  /** Operator commands (acknowledge, shelve, unshelve). */
  command: string;
  /** Replies to commands that were refused. */
  rejected: string;
  alarm: string;
  state: string;
  /** Run-up and coast-down records (QoS 1, not retained). */
  transient: string;
  /** fn and Q measured from transients, with drift advisories (QoS 1, not retained). */
  identified: string;
}

export function assetTopics(asset: AssetConfig, prefix: string): AssetTopics {
  const base = `${prefix}/${asset.id}`;
  const samples = new Map<string, SampleInput>();
  for (const s of asset.sensors) samples.set(s.topic ?? `${base}/samples/${s.id}`, { channel: s.channel, role: 'sensor', id: s.id });
  if (asset.speed.source === 'tach') {
    samples.set(asset.speed.topic ?? `${base}/samples/tach`, { channel: asset.speed.channel as number, role: 'tach', id: 'tach' });
  }
  return {
    samples,
    speed: asset.speed.source === 'topic' ? (asset.speed.topic as string) : null,
    command: `${base}/command`,
    rejected: `${base}/command/rejected`,
    alarm: `${base}/alarm`,
    state: `${base}/state`,
    transient: `${base}/transient`,
    identified: `${base}/identified`,
  };
}

/** The topics an asset's runtime takes input from (what the agent subscribes to for it). */
export function inputTopics(topics: AssetTopics): string[] {
  return [...topics.samples.keys(), ...(topics.speed ? [topics.speed] : []), topics.command];
}

/** Retained presence of one agent process, with its last will. */
export function agentStatusTopic(prefix: string, clientId: string): string {
  return `${prefix}/agent/${clientId}/status`;
}
