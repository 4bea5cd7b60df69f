/**
 * A simulated machine on MQTT, publishing the way a sensor gateway beside it would: each bound
 * channel cut into sample blocks, one topic per sensor (and one for the tach pulses), a
 * sequence number per topic, epoch timestamps, at a chosen pace.
 *
 * Time stamps. The run lasts D s of data and is published at `speed` data seconds per wall
 * second. Block k covers data time [tau, tau + b) from the run's start and goes out once its
 * last sample "exists", at wall time W0 + (tau + b) / speed, stamped t = T0 + tau, with
 *   T0 = W0 + min(0, D / speed - D)
 * so the last block is stamped about "now" when it goes out, and every stamp lies behind the
 * wall clock when published: t - wall = (tau - D)(1 - 1/speed) - b/speed <= 0 for speed >= 1
 * and tau (1 - 1/speed) - b/speed < 0 below 1. An agent drops blocks stamped in its future.
 *
 * Bounded: it stops at the end of the run (or when `signal` aborts) and returns what it sent.
 */
import type { MqttClient } from 'mqtt';
import { openRecording, readRecordingInfo } from '../acquisition/recordingReader.ts';
import { encodeSampleBlockBinary, encodeSampleBlockJson } from '../acquisition/samplePayload.ts';
import { assetTopics, type SampleInput } from '../agent/topics.ts';
import type { AssetConfig } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import type { Profile } from '../simulation/profile.ts';
import { synthesisLayout, synthesize } from '../simulation/synthesize.ts';

/** Where the machine's samples come from: a recording, or synthesis from a speed profile. */
export type MachineSource = { kind: 'recording'; path: string } | { kind: 'profile'; profile: Profile };

export interface MachinePublisherOptions {
  client: MqttClient;
  asset: AssetConfig;
  topicPrefix: string;
  source: MachineSource;
  /** Seconds of data per block (default 0.25). */
  blockS?: number;
  /** Data seconds per wall second (default 3: a 181 s run in about a minute). */
  speed?: number;
  /** Payload form (default binary v1). */
  format?: 'binary' | 'json';
  /** QoS of the sample blocks (default 1: a gateway that wants its blocks to arrive). */
  qos?: 0 | 1;
  /** Wall clock, ms since the epoch. */
  nowMs?: () => number;
  signal?: AbortSignal;
  /** Called once before the first block, with the run's timing. */
  onStart?: (run: RunTiming) => void;
}

export interface RunTiming {
  /** Epoch seconds stamped on the run's first sample. */
  startS: number;
  /** Seconds of data in the run. */
  durationS: number;
  sampleRateHz: number;
  speed: number;
  /** Topic -> what it carries. */
  topics: Map<string, SampleInput>;
}

export interface PublishCounts {
  /** Blocks published, all topics together, and per topic. */
  blocks: number;
  perTopic: Record<string, number>;
  /** Samples per topic summed, and payload bytes. */
  samples: number;
  bytes: number;
  /** Seconds of data sent, from the run's start. */
  dataS: number;
  /** Wall seconds from the first block's schedule start to the last publish. */
  wallS: number;
  /** True when stopped by the signal before the end of the run. */
  aborted: boolean;
  run: RunTiming;
}

export const DEFAULT_BLOCK_S = 0.25;
export const DEFAULT_SPEED = 3;
/** Publishes awaiting their acknowledgement before the next block waits (QoS 1). */
const MAX_IN_FLIGHT = 32;

export async function publishMachine(opts: MachinePublisherOptions): Promise<PublishCounts> {
  const blockS = opts.blockS ?? DEFAULT_BLOCK_S;
  const speed = opts.speed ?? DEFAULT_SPEED;
  const nowMs = opts.nowMs ?? Date.now;
  if (!(blockS > 0 && Number.isFinite(blockS))) throw new RangeError(`blockS must be a finite number > 0, got ${blockS}`);
  if (!(speed > 0 && Number.isFinite(speed))) throw new RangeError(`speed must be a finite number > 0, got ${speed}`);

  const topics = assetTopics(opts.asset, opts.topicPrefix).samples;
  const { sampleRateHz, frames, channels } = await layoutOf(opts.asset, opts.source);
  const missing = [...topics.values()].filter((t) => t.channel >= channels);
  if (missing.length > 0) {
    throw new QbandError(
      'QB_E_CHANNEL_MISSING',
      `the map binds channel(s) ${missing.map((m) => `${m.channel} (${m.id})`).join(', ')} of asset ${opts.asset.id}, but the source has ${channels} channel(s)`,
    );
  }
  const framesPerBlock = Math.max(1, Math.round(blockS * sampleRateHz));
  const durationS = frames / sampleRateHz;
  const wall0Ms = nowMs();
  // Millisecond stamps read better in logs; the rounding stays inside the b/speed margin.
  const startS = Math.floor(wall0Ms + Math.min(0, (durationS / speed - durationS) * 1000)) / 1000;
  const run: RunTiming = { startS, durationS, sampleRateHz, speed, topics };
  opts.onStart?.(run);

  const seq = new Map<string, number>([...topics.keys()].map((t) => [t, 0]));
  const counts: PublishCounts = { blocks: 0, perTopic: {}, samples: 0, bytes: 0, dataS: 0, wallS: 0, aborted: false, run };
  const qos = opts.qos ?? 1;
  const inFlight = new Set<Promise<unknown>>();

  for await (const block of blocksOf(opts.asset, opts.source, framesPerBlock)) {
    const count = block.channels[0]?.length ?? 0;
    if (count === 0) continue;
    const endS = (block.startFrame + count) / sampleRateHz;
    const dueMs = wall0Ms + (endS / speed) * 1000;
    if (!(await sleepUntil(dueMs, nowMs, opts.signal))) {
      counts.aborted = true;
      break;
    }
    const tS = startS + block.startFrame / sampleRateHz;
    for (const [topic, input] of topics) {
      const n = seq.get(topic) as number;
      const sampleBlock = { tS, sampleRateHz, seq: n, samples: block.channels[input.channel] };
      const payload = opts.format === 'json' ? encodeSampleBlockJson(sampleBlock) : Buffer.from(encodeSampleBlockBinary(sampleBlock));
      seq.set(topic, n + 1);
      counts.perTopic[topic] = n + 1;
      counts.blocks++;
      counts.samples += count;
      counts.bytes += payload.length;
      const sent: Promise<unknown> = opts.client.publishAsync(topic, payload, { qos }).finally(() => inFlight.delete(sent));
      inFlight.add(sent);
    }
    // Waiting for each acknowledgement in turn would tie the pace to the round trip (and to
    // delayed TCP acks, ~40 ms a block on some brokers): keep a window in flight instead.
    while (inFlight.size >= MAX_IN_FLIGHT) await Promise.race(inFlight);
    counts.dataS = endS;
  }
  await Promise.all(inFlight);
  counts.wallS = (nowMs() - wall0Ms) / 1000;
  return counts;
}

async function layoutOf(asset: AssetConfig, source: MachineSource): Promise<{ sampleRateHz: number; frames: number; channels: number }> {
  if (source.kind === 'recording') return readRecordingInfo(source.path);
  const layout = synthesisLayout(asset, source.profile);
  return { sampleRateHz: layout.sampleRateHz, frames: layout.frames, channels: layout.channelNames.length };
}

async function* blocksOf(asset: AssetConfig, source: MachineSource, framesPerBlock: number): AsyncGenerator<{ startFrame: number; channels: Float32Array[] }> {
  if (source.kind === 'recording') {
    yield* openRecording(source.path, framesPerBlock);
    return;
  }
  yield* synthesize(asset, source.profile, { framesPerBlock });
}

/** Waits until the wall clock reaches dueMs; false if aborted first. */
function sleepUntil(dueMs: number, nowMs: () => number, signal?: AbortSignal): Promise<boolean> {
  if (signal?.aborted) return Promise.resolve(false);
  const waitMs = dueMs - nowMs();
  if (waitMs <= 0) return Promise.resolve(true);
  return new Promise((resolve) => {
    const onAbort = () => {
      clearTimeout(timer);
      resolve(false);
    };
    const timer = setTimeout(() => {
      signal?.removeEventListener('abort', onAbort);
      resolve(true);
    }, waitMs);
    signal?.addEventListener('abort', onAbort, { once: true });
  });
}
