/**
 * A rig for the live agent's integration tests: a real broker (aedes in-process on a free
 * port, or the broker named by QBAND_TEST_BROKER), an asset map written to a temp dir with a
 * topic prefix of its own (so runs never see each other's retained messages), simulated sample
 * blocks, and a logger whose lines the test can read back as JSON.
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { createServer, type Server } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Writable } from 'node:stream';
import { Aedes } from 'aedes';
import { afterAll, afterEach, beforeAll } from 'vitest';
import type { MqttClient } from 'mqtt';
import { createLogger, type Logger } from '../../src/agent/logger.ts';
import { assetTopics } from '../../src/agent/topics.ts';
import { encodeSampleBlockBinary, encodeSampleBlockJson } from '../../src/acquisition/samplePayload.ts';
import { parseAssetMap } from '../../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../../src/config/types.ts';
import { parseProfile } from '../../src/simulation/profile.ts';
import { synthesize } from '../../src/simulation/synthesize.ts';

export interface TestBroker {
  url: string;
  /** aedes speaks MQTT 3.1.1 only; an external broker is spoken to in MQTT 5 unless told. */
  protocolVersion: 4 | 5;
  name: string;
  close(): Promise<void>;
}

export async function startTestBroker(): Promise<TestBroker> {
  const external = process.env.QBAND_TEST_BROKER;
  if (external) {
    const version = process.env.QBAND_TEST_MQTT_VERSION === '3.1.1' ? 4 : 5;
    return { url: external, protocolVersion: version, name: `${external} (MQTT ${version === 5 ? '5' : '3.1.1'})`, close: async () => undefined };
  }
  const aedes = await Aedes.createBroker();
  const server: Server = createServer(aedes.handle);
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const port = (server.address() as { port: number }).port;
  return {
    url: `mqtt://127.0.0.1:${port}`,
    protocolVersion: 4,
    name: `aedes in-process on port ${port} (MQTT 3.1.1)`,
    close: () =>
      new Promise<void>((resolve) => {
        server.close(() => resolve());
        aedes.close();
      }),
  };
}

/**
 * Worker threads for the agents the live suites start: QBAND_TEST_WORKERS=<n> runs them with
 * n workers (CI runs the live suite once that way), else 0 as `Agent.start` defaults.
 */
export function testWorkers(): number {
  return Number(process.env.QBAND_TEST_WORKERS ?? 0);
}

/** The demo map with a test prefix and broker, shorter delays and frames, and any edits. */
export function writeTestMap(dir: string, prefix: string, brokerUrl: string, edit: (text: string) => string = (t) => t): string {
  let text = readFileSync(new URL('../../config/demo-map.yaml', import.meta.url), 'utf8');
  text = text.replace('site: north-basin', `site: north-basin\nbroker: { url: "${brokerUrl}", topic_prefix: ${prefix} }\nagent: { state_every_s: 1, stale_after_s: 2 }`);
  text = text.replace(
    'alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }',
    'alarm: { on_delay_s: 3, off_delay_s: 2, deadband_pct: 1, priority: high }\n    analysis: { frame_size: 2048 }',
  );
  text = edit(text);
  const path = join(dir, 'map.yaml');
  writeFileSync(path, text);
  return path;
}

export function loadAsset(mapPath: string): AssetConfig {
  const { map, problems } = parseAssetMap(readFileSync(mapPath, 'utf8'), mapPath);
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  return map.assets[0];
}

/**
 * A short run, times by hand: 700 rpm for 3 s, ramp to 852 rpm over 3..5 s (1X enters the
 * reed band's 800.4 rpm at 4.32 s), hold to 13 s, ramp to 950 rpm over 13..15 s (1X passes
 * 915.4 rpm, band plus deadband, at 14.29 s), hold to 20 s (vane pass at 79.2 Hz stays below
 * the discharge-pipe band's 80.55 Hz less its 0.83 Hz deadband). With on-delay 3 s and
 * off-delay 2 s: raise at about 7.3 s, clear at about 16.3 s of data.
 */
export const SHORT_RUN = shortRun();

/** The short run with another first hold (the times above move with it) and noise seed. */
export function shortRun(holdS = 3, seed = 9): string {
  return `
sample_rate_hz: 2560
start_rpm: 700
segments:
  - { hold_s: ${holdS} }
  - { ramp_to_rpm: 852, over_s: 2 }
  - { hold_s: 8 }
  - { ramp_to_rpm: 950, over_s: 2 }
  - { hold_s: 5 }
forcing: { 1x: 0.02, vane-pass: 0.01 }
noise_g: 0.002
seed: ${seed}
`;
}
export const SHORT_RUN_RAISE_S = 3 + ((800.4124 - 700) / 152) * 2 + 3;
export const SHORT_RUN_CLEAR_S = 13 + ((60 * (15.1152 + 0.142) - 852) / 98) * 2 + 2;

/** Whole channels of a simulated run. */
export function simulateRun(asset: AssetConfig, profileText = SHORT_RUN): { fs: number; channels: Float32Array[] } {
  const { profile, problems } = parseProfile(profileText);
  if (!profile) throw new Error(problems.map((p) => p.message).join('\n'));
  const blocks = [...synthesize(asset, profile, { framesPerBlock: 4096 })];
  const channels = blocks[0].channels.map((_, c) => {
    const all = new Float32Array(blocks.reduce((n, b) => n + b.channels[c].length, 0));
    let at = 0;
    for (const b of blocks) {
      all.set(b.channels[c], at);
      at += b.channels[c].length;
    }
    return all;
  });
  return { fs: profile.sampleRateHz, channels };
}

export interface BlockMessage {
  topic: string;
  payload: Buffer | string;
  seq: number;
  tS: number;
}

/** One channel cut into blocks of `blockS`, stamped from `t0S`, as payloads for a topic. */
export function blockMessages(topic: string, samples: Float32Array, fs: number, t0S: number, blockS = 0.25, format: 'binary' | 'json' = 'binary'): BlockMessage[] {
  const n = Math.round(blockS * fs);
  const out: BlockMessage[] = [];
  for (let start = 0, seq = 0; start < samples.length; start += n, seq++) {
    const block = { tS: t0S + start / fs, sampleRateHz: fs, seq, samples: samples.slice(start, start + n) };
    out.push({ topic, seq, tS: block.tS, payload: format === 'binary' ? Buffer.from(encodeSampleBlockBinary(block)) : encodeSampleBlockJson(block) });
  }
  return out;
}

/** The short run's two channels of the map at `mapPath`, as interleaved block messages stamped from `t0S`. */
export function shortRunBlocks(mapPath: string, prefix: string, t0S: number): BlockMessage[] {
  const asset = loadAsset(mapPath);
  const topics = assetTopics(asset, prefix);
  const run = simulateRun(asset);
  return interleave(...[...topics.samples].map(([topic, input]) => blockMessages(topic, run.channels[input.channel], run.fs, t0S)));
}

/** Publishes in order with QoS 1 and waits for every acknowledgement. */
export async function publishAll(client: MqttClient, messages: Array<{ topic: string; payload: Buffer | string }>): Promise<void> {
  await Promise.all(messages.map((m) => client.publishAsync(m.topic, m.payload, { qos: 1 })));
}

/** Interleaves several channels' block lists block by block (as a gateway would send them). */
export function interleave<T>(...lists: T[][]): T[] {
  const out: T[] = [];
  const longest = Math.max(...lists.map((l) => l.length));
  for (let i = 0; i < longest; i++) for (const l of lists) if (l[i]) out.push(l[i]);
  return out;
}

/** A logger writing JSON lines into an array the test can read. */
export function memoryLogger(): { logger: Logger; lines: () => Array<Record<string, unknown>> } {
  const chunks: string[] = [];
  const destination = new Writable({
    write(chunk, _enc, done) {
      chunks.push(String(chunk));
      done();
    },
  });
  const logger = createLogger({ destination: destination as never, level: 'debug' });
  return {
    logger,
    lines: () =>
      chunks
        .join('')
        .split('\n')
        .filter(Boolean)
        .map((l) => JSON.parse(l) as Record<string, unknown>),
  };
}

export function tempDir(): string {
  return mkdtempSync(join(tmpdir(), 'qband-live-'));
}

export function uniquePrefix(): string {
  return `qbtest-${process.pid}-${Math.random().toString(36).slice(2, 8)}`;
}

/** Polls `check` until it returns a value, or fails after `timeoutMs` with `what`. */
export async function eventually<T>(what: string, check: () => T | undefined | null | false, timeoutMs = 10_000): Promise<T> {
  const start = Date.now();
  for (;;) {
    const v = check();
    if (v) return v;
    if (Date.now() - start > timeoutMs) throw new Error(`timed out after ${timeoutMs} ms waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 20));
  }
}

/**
 * A live suite's broker and what its tests start: the broker up before the suite, every agent
 * and client a test pushed on `running` stopped after that test, the broker closed at the end.
 */
export function liveSuite(): { readonly broker: TestBroker; running: Array<{ stop(): Promise<void> } | MqttClient> } {
  let broker: TestBroker | null = null;
  const suite = {
    get broker(): TestBroker {
      if (!broker) throw new Error('the test broker starts in beforeAll');
      return broker;
    },
    running: [] as Array<{ stop(): Promise<void> } | MqttClient>,
  };
  beforeAll(async () => {
    broker = await startTestBroker();
  });
  afterAll(async () => {
    await broker?.close();
  });
  afterEach(async () => {
    for (const r of suite.running.splice(0)) {
      if ('endAsync' in r) await r.endAsync(true);
      else await r.stop();
    }
  });
  return suite;
}
