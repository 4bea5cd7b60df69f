/**
 * The live agent through a real broker, against the engine alone, in one run.
 *
 *   publisher process (livePublisher.ts) --MQTT--> broker --MQTT--> Agent (this process)
 *
 * 1. Throughput, flat out: C channels of 25.6 kHz float32 in 0.1 s binary blocks plus 10 speed
 *    records a second, published as fast as the agent takes them (the publisher stays at most
 *    a window of blocks ahead of what the agent has handled, so no broker queue overflows).
 *    Channels per core = channel-seconds of data per CPU-second of this process
 *    (process.cpuUsage: all threads, so garbage collection and socket work are charged),
 *    median over equal segments of each run, the first segment left out as warm-up.
 * 2. The same blocks through the agent's parts without a broker, in this process, in rounds
 *    alternating with the live runs (the machine is shared; its load drifts): the engine alone
 *    (decodeSampleBlock + AssetEngine.pushSpeed/pushChannel) and the asset runtime
 *    (AssetRuntime.onMessage: decode, sequencer, engine, state and alarm JSON). The ratio
 *    live / engine, and a V8 sampling profile of one more live run, say where the time goes.
 *    "Kept up" in real time (3) is judged from the agent's own counters (read from its state
 *    message, made to publish by a no-op operator command) and from the lag of every block.
 * 3. Keeping up in real time: blocks published when their data time has come, C in a few steps.
 * 4. Alarm latency: a speed stepping into the band and out again; wall time from the publication
 *    of the block that completes the on-delay to the alarm reaching a subscriber.
 *
 * Broker: Mosquitto on 127.0.0.1:1883 (MQTT 5) if it answers, else aedes in a child process
 * (MQTT 3.1.1). Topics live under qbench-<pid>/; retained messages are cleared at the end.
 *
 * Run: npm run bench:live. Takes about 60 to 90 s. Options (after --): --channels 16,64,256 (flat-out
 * steps), --paced 200,400 (real-time steps instead of the automatic ones), --qos 0|1 (sample
 * blocks; default 1), --latency-channels 8, --raises 5, --broker <url>|aedes, --nodelay (TCP_NODELAY
 * on the agent's socket, set from outside), --workers <n|auto> (the agent's worker threads; default 0,
 * its own thread, as before worker threads). QBENCH_DEBUG=1 prints the steps of each run.
 */
import { SamplePool } from '../src/acquisition/samplePool.ts';
import { fork, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { cpus, tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parseArgs } from 'node:util';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { DEFAULT_MAX_SAMPLES_PER_BLOCK, decodeSampleBlock } from '../src/acquisition/samplePayload.ts';
import { Agent } from '../src/agent/agent.ts';
import { AssetRuntime } from '../src/agent/assetRuntime.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig, SiteMap } from '../src/config/types.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';
import { memoryLogger } from '../test/support/liveRig.ts';
import {
  ASSET_ID,
  BLOCK_S,
  BLOCK_SAMPLES,
  FS_HZ,
  IN_BAND_RPM,
  benchMapText,
  benchTopics,
  blockPool,
  blockTimeS,
  periodStartS,
  poolIndex,
  scheduleS,
  speedPayload,
  stampBlock,
  type SpeedSchedule,
} from './benchStream.ts';
import { startProfile, type ProfileShares } from './cpuProfile.ts';
import type { FromPublisher, PublishPlan, ToPublisher } from './livePublisher.ts';

const { values: args } = parseArgs({
  options: {
    channels: { type: 'string', default: '16,64,256' },
    qos: { type: 'string', default: '1' },
    'latency-channels': { type: 'string', default: '8' },
    raises: { type: 'string', default: '5' },
    paced: { type: 'string', default: '' },
    broker: { type: 'string', default: '' },
    nodelay: { type: 'boolean', default: false },
    workers: { type: 'string', default: '0' },
  },
});
/** The live agent's worker threads (`qband run --workers`); 0 keeps the figures comparable with earlier runs. */
const WORKERS = args.workers === 'auto' ? 'auto' : Number(args.workers);
/** Real-time steps given on the command line (else chosen from the flat-out results). */
const PACED_CHANNELS = String(args.paced).split(',').filter(Boolean).map(Number);
const debug = (what: string): void => void (process.env.QBENCH_DEBUG && console.error(`[${new Date().toISOString()}] ${what}`));
const FLAT_CHANNELS = String(args.channels).split(',').map(Number);
const QOS = Number(args.qos) === 0 ? 0 : 1;
const LATENCY_CHANNELS = Number(args['latency-channels']);
const RAISES = Number(args.raises);
/** Flat out: rounds of (live, runtime, engine), measured segments per run (after a warm-up one), data per segment. */
const ROUNDS = 3;
const ROUND_SEGMENTS = 4;
const SEGMENT_CHANNEL_S = 64;
/** Flat out: blocks the publisher may run ahead of the agent; credits sent every so many. */
const WINDOW_BLOCKS = 500;
const CREDIT_EVERY = 100;
const INFLIGHT = 16;
const ON_DELAY_S = 2;
const OFF_DELAY_S = 1;
/** Keep-up: seconds of data per step; the lag trend that still counts as keeping up (s per s). */
const PACED_S = 5;
const MAX_LAG_SLOPE = 0.02;
const MAX_FINAL_LAG_S = 1;
/** Real-time steps, as fractions of the flat-out wall rate; a midpoint is tried after the first failure. */
const PACED_STEPS = [0.6, 0.85, 1.1];
/** A run is over when no block came for this long after the publisher finished. */
const STALL_MS = 1500;
const MOSQUITTO_URL = 'mqtt://127.0.0.1:1883';
/** Counters that mean a block was lost, refused or its history reset. */
const PROBLEM_COUNTER = /^(drop_|reset_|seq_(duplicate|late|missing|gap|rate_change|time_jump|sender_restart)$)/;

const wallMs = (): number => performance.timeOrigin + performance.now();
const cpuS = (): number => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1e6;
};
const median = (a: number[]): number => {
  const s = [...a].sort((x, y) => x - y);
  return s.length === 0 ? Number.NaN : s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};
const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

/** Waits for `p` at most `ms`; says so when it gives up (the bench must end whatever a broker does). */
async function bounded<T>(p: Promise<T>, what: string, ms = 5000): Promise<T | undefined> {
  let timer: NodeJS.Timeout | undefined;
  const late = new Promise<undefined>((resolve) => {
    timer = setTimeout(() => {
      console.error(`  (${what}: no answer after ${ms} ms, going on)`);
      resolve(undefined);
    }, ms);
  });
  try {
    return await Promise.race([p, late]);
  } finally {
    clearTimeout(timer);
  }
}

/** Busy and total CPU time of the whole machine (all cores), from /proc/stat; null elsewhere. */
function machineTicks(): { busy: number; total: number } | null {
  try {
    const f = readFileSync('/proc/stat', 'utf8').split('\n')[0].trim().split(/\s+/).slice(1).map(Number);
    const idle = f[3] + (f[4] ?? 0);
    const total = f.reduce((a, v) => a + v, 0);
    return { busy: total - idle, total };
  } catch {
    return null;
  }
}

// ---------------------------------------------------------------------------------- broker

interface Broker {
  url: string;
  protocolVersion: 4 | 5;
  name: string;
  close(): Promise<void>;
}

function connectOnce(url: string, protocolVersion: 4 | 5, clientId: string, timeoutMs = 3000): Promise<MqttClient> {
  return new Promise((resolve, reject) => {
    const c = mqtt.connect(url, { protocolVersion, clientId, clean: true, reconnectPeriod: 0, connectTimeout: timeoutMs });
    c.once('connect', () => resolve(c));
    c.once('error', (e) => {
      c.end(true);
      reject(e);
    });
    c.once('close', () => reject(new Error(`no connection to ${url}`)));
  });
}

async function mosquittoVersion(c: MqttClient): Promise<string | null> {
  let version: string | null = null;
  const onMessage = (topic: string, payload: Buffer): void => {
    if (topic === '$SYS/broker/version') version = payload.toString();
  };
  c.on('message', onMessage);
  await c.subscribeAsync('$SYS/broker/version').catch(() => undefined);
  for (let i = 0; i < 10 && version === null; i++) await sleep(30);
  c.off('message', onMessage);
  await c.unsubscribeAsync('$SYS/broker/version').catch(() => undefined);
  return version;
}

/** --broker <url> (MQTT 5), --broker aedes, or by default Mosquitto on 127.0.0.1:1883 else aedes. */
async function pickBroker(): Promise<Broker> {
  const given = String(args.broker);
  if (given && given !== 'aedes') return { url: given, protocolVersion: 5, name: `${given} (given), MQTT 5`, close: async () => undefined };
  try {
    if (given === 'aedes') throw new Error('aedes asked for');
    const c = await connectOnce(MOSQUITTO_URL, 5, `qbench-probe-${process.pid}`, 1500);
    const version = await mosquittoVersion(c);
    await c.endAsync();
    return { url: MOSQUITTO_URL, protocolVersion: 5, name: `${version ?? 'broker'} at 127.0.0.1:1883, own process, MQTT 5`, close: async () => undefined };
  } catch {
    const child = fork(fileURLToPath(new URL('./benchBroker.ts', import.meta.url)), [], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
    const port = await new Promise<number>((resolve, reject) => {
      child.once('message', (m: { port: number }) => resolve(m.port));
      child.once('exit', (code) => reject(new Error(`aedes broker process exited (${code})`)));
    });
    return {
      url: `mqtt://127.0.0.1:${port}`,
      protocolVersion: 4,
      name: `aedes in a child process on port ${port}, MQTT 3.1.1 (${given === 'aedes' ? 'asked for' : 'no Mosquitto on 127.0.0.1:1883'})`,
      close: () => stopChild(child),
    };
  }
}

function stopChild(child: ChildProcess): Promise<void> {
  if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve();
  return new Promise((resolve) => {
    const timer = setTimeout(() => child.kill('SIGKILL'), 3000);
    child.once('exit', () => {
      clearTimeout(timer);
      resolve();
    });
    if (child.connected) child.disconnect();
    else child.kill('SIGTERM');
  });
}

// ------------------------------------------------------------------------------- publisher

class Publisher {
  readonly child: ChildProcess;
  private handler: (m: FromPublisher) => void = () => undefined;

  private constructor(child: ChildProcess) {
    this.child = child;
    child.on('message', (m: FromPublisher) => {
      if (m.type === 'error') console.error(`publisher: ${m.message}`);
      this.handler(m);
    });
  }

  static async start(broker: Broker): Promise<Publisher> {
    const child = fork(fileURLToPath(new URL('./livePublisher.ts', import.meta.url)), [], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
    const p = new Publisher(child);
    await new Promise<void>((resolve, reject) => {
      p.handler = (m) => (m.type === 'connected' ? resolve() : m.type === 'error' ? reject(new Error(m.message)) : undefined);
      child.once('exit', (code) => reject(new Error(`publisher exited (${code})`)));
      p.send({ type: 'connect', url: broker.url, protocolVersion: broker.protocolVersion });
    });
    return p;
  }

  send(m: ToPublisher): void {
    if (this.child.connected) this.child.send(m);
  }

  onMessage(handler: (m: FromPublisher) => void): void {
    this.handler = handler;
  }
}

// ------------------------------------------------------------------------------ live runs

interface Segment {
  cpuS: number;
  wallS: number;
  /** Time inside the agent's message handler (live runs). */
  handlerS: number;
}

interface LiveSpec {
  channels: number;
  periods: number;
  mode: 'flat' | 'paced';
  schedule: SpeedSchedule;
  /** Checkpoints (CPU, wall, handler time) every so many periods of blocks handled. */
  segmentPeriods: number;
  recordTimes: boolean;
  profile: boolean;
}

interface LiveResult {
  complete: boolean;
  t0S: number;
  segments: Segment[];
  problems: string[];
  publisher: { cpuS: number; wallS: number; lateMaxMs: number; published: number } | null;
  /** Busy cores of the whole machine during the run. */
  machineCores: number | null;
  /** paced: largest lag of each period's blocks (s from data end on the wall clock to handled). */
  lagS: Float64Array;
  alarms: Array<{ event: string; tS: number; receivedMs: number }>;
  times: Map<number, { speedMs: number; blockMs: number[] }>;
  profile: ProfileShares | null;
}

interface Bench {
  broker: Broker;
  publisher: Publisher;
  sub: MqttClient;
  dir: string;
  prefixRoot: string;
  runs: number;
}

async function liveRun(b: Bench, spec: LiveSpec): Promise<LiveResult> {
  const n = ++b.runs;
  const prefix = `${b.prefixRoot}/r${n}`;
  const topics = benchTopics(prefix, spec.channels);
  const mapPath = join(b.dir, `map-${n}.yaml`);
  writeFileSync(mapPath, benchMapText({ prefix, brokerUrl: b.broker.url, channels: spec.channels, onDelayS: ON_DELAY_S, offDelayS: OFF_DELAY_S }));
  const sampleTopics = new Set(topics.samples);
  const expected = spec.channels * spec.periods;
  const paced = spec.mode === 'paced';
  const t0S = paced ? Math.ceil(Date.now() / 1000) + 0.5 : Date.now() / 1000 - spec.periods * BLOCK_S - 10;

  // The agent's client, with one listener before the agent's and one after: together they
  // time the agent's handling of each message and count what it has handled.
  let agentClient: MqttClient | null = null;
  const connect = (url: string, options: IClientOptions): MqttClient => {
    agentClient = mqtt.connect(url, options);
    agentClient.on('message', before);
    // --nodelay: Nagle's algorithm off on the agent's socket, set from outside (what a fix would give).
    if (args.nodelay) agentClient.on('connect', () => (agentClient?.stream as unknown as { setNoDelay?: (v: boolean) => void }).setNoDelay?.(true));
    return agentClient;
  };
  let inAtMs = 0;
  let started = false;
  let processed = 0;
  let handlerMs = 0;
  let mark = { cpuS: 0, wallS: 0, handlerMs: 0 };
  let ticksEnd: ReturnType<typeof machineTicks> = null;
  const segments: Segment[] = [];
  const segmentBlocks = spec.segmentPeriods * spec.channels;
  const lagS = new Float64Array(spec.periods);
  function before(topic: string): void {
    inAtMs = performance.now();
    if (!started && sampleTopics.has(topic)) {
      started = true;
      mark = { cpuS: cpuS(), wallS: wallMs() / 1000, handlerMs: 0 };
    }
  }
  function after(topic: string, payload: Buffer): void {
    handlerMs += performance.now() - inAtMs;
    if (!sampleTopics.has(topic)) return;
    processed++;
    if (!paced && processed % CREDIT_EVERY === 0) b.publisher.send({ type: 'credit', processed });
    if (paced) {
      const tS = blockTimeS(payload);
      const period = Math.round((tS - t0S) / BLOCK_S);
      if (period >= 0 && period < lagS.length) lagS[period] = Math.max(lagS[period], wallMs() / 1000 - (tS + BLOCK_S));
    }
    if (processed % segmentBlocks === 0) {
      const c = cpuS();
      const w = wallMs() / 1000;
      segments.push({ cpuS: c - mark.cpuS, wallS: w - mark.wallS, handlerS: (handlerMs - mark.handlerMs) / 1000 });
      mark = { cpuS: c, wallS: w, handlerMs };
    }
    if (processed === expected) ticksEnd = machineTicks();
  }

  const { logger, lines } = memoryLogger();
  const agent = await Agent.start(
    { mapPath, protocolVersion: b.broker.protocolVersion, clientId: `qbench-agent-${process.pid}-${n}`, watchMap: false, tickMs: 1000, workers: WORKERS },
    { logger, connect },
  );
  await agent.ready();
  (agentClient as unknown as MqttClient).on('message', after);

  // The subscriber: alarms (with their time of receipt) and the latest state.
  const alarms: LiveResult['alarms'] = [];
  let latestState: { counters?: Record<string, number> } | null = null;
  const onSub = (topic: string, payload: Buffer): void => {
    if (topic === topics.alarm) {
      const receivedMs = wallMs();
      const m = JSON.parse(payload.toString()) as { event: string; t_s: number };
      alarms.push({ event: m.event, tS: m.t_s, receivedMs });
    } else if (topic === topics.state && payload.length > 0) {
      latestState = JSON.parse(payload.toString()) as { counters?: Record<string, number> };
    }
  };
  b.sub.on('message', onSub);
  await b.sub.subscribeAsync([topics.alarm, topics.state], { qos: 1 });

  const times = new Map<number, { speedMs: number; blockMs: number[] }>();
  let publisherDone: LiveResult['publisher'] = null;
  let ticksAtPublished: ReturnType<typeof machineTicks> = null;
  b.publisher.onMessage((m) => {
    if (m.type === 'times' && m.id === n) times.set(m.period, { speedMs: m.speedMs, blockMs: m.blockMs });
    if (m.type === 'done' && m.id === n) {
      publisherDone = { cpuS: m.cpuS, wallS: m.wallS, lateMaxMs: m.lateMaxMs, published: m.published };
      ticksAtPublished = machineTicks();
    }
  });

  const plan: PublishPlan = {
    id: n,
    mode: spec.mode,
    prefix,
    channels: spec.channels,
    periods: spec.periods,
    t0S,
    qos: QOS,
    schedule: spec.schedule,
    window: WINDOW_BLOCKS,
    inflight: INFLIGHT,
    recordTimes: spec.recordTimes,
  };
  const stopProfile = spec.profile ? await startProfile() : null;
  const ticks0 = machineTicks();
  b.publisher.send({ type: 'run', plan });
  // Bounded: paced runs last their data time, flat runs get a generous allowance, and a run
  // whose blocks stopped coming for STALL_MS after the publisher finished is over.
  let complete = false;
  const deadlineMs = performance.now() + (paced ? (t0S + spec.periods * BLOCK_S) * 1000 - Date.now() + 5000 : 20_000 + expected);
  for (let seen = -1, since = performance.now(); ; await sleep(20)) {
    const now = performance.now();
    if (processed === expected && publisherDone) {
      complete = true;
      break;
    }
    if (processed !== seen) [seen, since] = [processed, now];
    else if (publisherDone && now - since > STALL_MS) break;
    if (now > deadlineMs) break;
  }
  debug(`run ${n}: ${complete ? 'complete' : 'incomplete'}, ${processed} of ${expected}`);
  const ticks1 = ticksEnd ?? ticksAtPublished ?? machineTicks();
  const profile = stopProfile ? await stopProfile() : null;
  if (!publisherDone) {
    b.publisher.send({ type: 'abort' });
    for (let i = 0; i < 100 && !publisherDone; i++) await sleep(20);
  }

  // The agent's own counters: an operator command that changes nothing makes it publish its
  // state at once (unshelve of a pair that is not shelved).
  await bounded(b.sub.publishAsync(`${prefix}/${ASSET_ID}/command`, JSON.stringify({ action: 'unshelve', component: 'frame-mode', order: 'o0', by: 'bench' }), { qos: 1 }), 'command');
  const counters = (): Record<string, number> | undefined => (latestState as { counters?: Record<string, number> } | null)?.counters;
  for (let i = 0; i < 100 && !(Number(counters()?.commands_unshelve) > 0); i++) await sleep(20);
  const problems: string[] = [];
  const final = counters();
  if (!final || !(Number(final.commands_unshelve) > 0)) problems.push('no state message with counters');
  else {
    if (final.blocks_received !== expected) problems.push(`blocks_received ${final.blocks_received} of ${expected}`);
    for (const [k, v] of Object.entries(final)) if (PROBLEM_COUNTER.test(k) && v > 0) problems.push(`${k} ${v}`);
  }
  const warnings = lines().filter((l) => Number(l.level) >= 40).length;
  if (warnings > 0) problems.push(`${warnings} warning lines logged`);
  if (!complete) problems.push(`${processed} of ${expected} blocks handled`);

  debug(`run ${n}: counters read`);
  b.sub.off('message', onSub);
  await bounded(b.sub.unsubscribeAsync([topics.alarm, topics.state]), 'unsubscribe');
  const statusTopic = agent.statusTopic;
  const stopped = await bounded(
    agent.stop().then(() => true, () => false),
    'agent stop',
  );
  if (!stopped) {
    // Still working through a backlog: cut the connection (the broker then publishes the
    // agent's last will, retained, which the clean-up below empties again).
    (agentClient as unknown as MqttClient).end(true);
    await sleep(300);
  }
  await bounded(Promise.all([topics.state, statusTopic].map((t) => b.sub.publishAsync(t, '', { qos: 1, retain: true }))), 'retained clean-up');
  debug(`run ${n}: agent stopped`);

  const machineCores =
    ticks0 && ticks1 && ticks1.total > ticks0.total ? ((ticks1.busy - ticks0.busy) / (ticks1.total - ticks0.total)) * cpus().length : null;
  return { complete, t0S, segments, problems, publisher: publisherDone, machineCores, lagS, alarms, times, profile };
}

// ------------------------------------------------------------------- the same without a broker

function parseBenchMap(channels: number, prefix: string): { map: SiteMap; asset: AssetConfig } {
  const text = benchMapText({ prefix, brokerUrl: 'mqtt://127.0.0.1:1', channels, onDelayS: ON_DELAY_S, offDelayS: OFF_DELAY_S });
  const { map, problems } = parseAssetMap(text, 'bench map');
  if (!map) throw new Error(`bench map is not valid:\n${problems.map((p) => p.message).join('\n')}`);
  return { map, asset: map.assets[0] };
}

/**
 * The live run's blocks pushed straight in: `engine` decodes and calls the engine as the
 * runtime does; `runtime` hands the payloads to AssetRuntime.onMessage (which also sequences,
 * counts and writes state and alarm JSON). Nothing is published.
 */
function localRun(level: 'engine' | 'runtime', channels: number, periods: number, segmentPeriods: number, pool: Uint8Array[], fft: RealFft): Segment[] {
  const prefix = 'qbench-local';
  const { map, asset } = parseBenchMap(channels, prefix);
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

// ------------------------------------------------------------------------------- reporting

/** Channels per core of each segment: channel-seconds of data over CPU seconds. */
function rates(segments: Segment[], channels: number, segmentPeriods: number): number[] {
  const chS = channels * segmentPeriods * BLOCK_S;
  return segments.map((s) => chS / s.cpuS);
}

/** Least-squares slope of y against x. */
function slope(x: number[], y: number[]): number {
  const mx = x.reduce((a, v) => a + v, 0) / x.length;
  const my = y.reduce((a, v) => a + v, 0) / y.length;
  let num = 0;
  let den = 0;
  for (let i = 0; i < x.length; i++) {
    num += (x[i] - mx) * (y[i] - my);
    den += (x[i] - mx) ** 2;
  }
  return den > 0 ? num / den : 0;
}

const sum = (a: number[]): number => a.reduce((x, v) => x + v, 0);
const f = (v: number | null | undefined, d = 0, w = 8): string => (v === null || v === undefined || !Number.isFinite(v) ? '-' : v.toFixed(d)).padStart(w);

/** Periods per segment: at least SEGMENT_CHANNEL_S channel-seconds, in whole half seconds. */
function segmentPeriodsFor(channels: number): number {
  return Math.max(5, Math.ceil(SEGMENT_CHANNEL_S / BLOCK_S / channels / 5) * 5);
}

interface FlatRow {
  c: number;
  /** Data per channel over all rounds, s. */
  dataS: number;
  live: number[];
  runtime: number[];
  engine: number[];
  /** live / engine of each round (medians of its segments). */
  ratios: number[];
  /** Measured live segments of every round. */
  segments: Segment[];
  publisher: { cpuS: number; wallS: number };
  machineCores: number[];
  problems: string[];
  complete: boolean;
}

function wallChannels(r: FlatRow): number {
  const segP = segmentPeriodsFor(r.c);
  return r.complete ? (r.c * r.segments.length * segP * BLOCK_S) / sum(r.segments.map((s) => s.wallS)) : Number.NaN;
}

function printFlat(r: FlatRow): void {
  const live = median(r.live);
  const engine = median(r.engine);
  const cpu = sum(r.segments.map((s) => s.cpuS));
  const ratios = `${f(live / engine, 2, 4)} (${Math.min(...r.ratios).toFixed(2)}-${Math.max(...r.ratios).toFixed(2)})`;
  console.log(
    `  ${f(r.c, 0, 5)} ${f(r.dataS, 0, 6)} ${f(live)} ${f(median(r.runtime))} ${f(engine)}  ${ratios.padEnd(16)} ${f(wallChannels(r), 0, 6)} ` +
      `${f(cpu / sum(r.segments.map((s) => s.wallS)), 2, 6)} ${f((100 * sum(r.segments.map((s) => s.handlerS))) / cpu, 0, 6)} % ` +
      `${f(r.publisher.cpuS / r.publisher.wallS, 2, 8)} ${f(median(r.machineCores), 2, 8)}   ${r.problems.length === 0 ? 'none' : r.problems.join('; ')}`,
  );
}

// ------------------------------------------------------------------------------------ main

async function main(): Promise<void> {
  const benchStart = performance.now();
  const broker = await pickBroker();
  const dir = mkdtempSync(join(tmpdir(), 'qbench-'));
  const prefixRoot = `qbench-${process.pid}`;
  let publisher: Publisher | null = null;
  let sub: MqttClient | null = null;
  try {
    publisher = await Publisher.start(broker);
    sub = await connectOnce(broker.url, broker.protocolVersion, `qbench-sub-${process.pid}`);
    const b: Bench = { broker, publisher, sub, dir, prefixRoot, runs: 0 };
    const pool = blockPool();
    const fft = await createRealFft(8192);
    const constant: SpeedSchedule = { kind: 'constant', rpm: IN_BAND_RPM };
    console.log(
      `qband live bench, broker: ${broker.name}\n` +
        `  25.6 kHz float32 channels in 0.1 s binary v1 blocks, QoS ${QOS}, one topic per channel; speed records on a speed topic,\n` +
        `  10 a second (${IN_BAND_RPM} rpm, 1X inside the frame mode's band); frames 8192, 50 % overlap, 4 averages, decimation 1\n` +
        `  (as npm run bench). Publisher: a child process. Agent and local runs: this process. Machine: ${cpus().length} cores.\n`,
    );

    // Warm-up: JIT of the agent, the engine and the runtime in this process.
    await liveRun(b, { channels: 16, periods: 30, mode: 'flat', schedule: constant, segmentPeriods: 10, recordTimes: false, profile: false });
    localRun('engine', 16, 30, 10, pool, fft);
    localRun('runtime', 16, 30, 10, pool, fft);

    // 1 and 2: flat out; live, runtime and engine on the same blocks, in alternating rounds so
    // that all three see the same machine (it is shared: its load drifts over seconds).
    console.log(
      `1-2. flat out. ch/core = channel-s of data per CPU-s of this process (process.cpuUsage), median of segments of >= ${SEGMENT_CHANNEL_S}\n` +
        `     channel-s; ${ROUNDS} rounds of live, runtime and engine in turn, ${ROUND_SEGMENTS} segments each after a warm-up one.\n` +
        `     live/eng: ratio of the medians (range over rounds). wall ch: channel-s of data per wall-second of the live runs (publisher,\n` +
        `     broker and agent sharing the machine). in handler: share of the agent's CPU spent inside its MQTT message handler.\n` +
        `     machine: busy cores of the whole machine (every process, others' too).`,
    );
    console.log('      C data s     live  runtime   engine  live/eng          wall ch  agent  in handler  publisher  machine  drops and gaps');
    console.log('                ch/core  ch/core  ch/core                            cores               cores    cores');
    const flats: FlatRow[] = [];
    for (const c of FLAT_CHANNELS) {
      const segP = segmentPeriodsFor(c);
      const periods = segP * (ROUND_SEGMENTS + 1);
      const row: FlatRow = { c, dataS: 0, live: [], runtime: [], engine: [], ratios: [], segments: [], publisher: { cpuS: 0, wallS: 0 }, machineCores: [], problems: [], complete: true };
      for (let round = 0; round < ROUNDS; round++) {
        const r = await liveRun(b, { channels: c, periods, mode: 'flat', schedule: constant, segmentPeriods: segP, recordTimes: false, profile: false });
        const live = rates(r.segments.slice(1), c, segP);
        row.live.push(...live);
        row.segments.push(...r.segments.slice(1));
        row.dataS += periods * BLOCK_S;
        row.publisher.cpuS += r.publisher?.cpuS ?? Number.NaN;
        row.publisher.wallS += r.publisher?.wallS ?? Number.NaN;
        if (r.machineCores !== null) row.machineCores.push(r.machineCores);
        row.problems.push(...r.problems);
        row.complete &&= r.complete;
        const local = { engine: [] as number[], runtime: [] as number[] };
        for (const level of round % 2 ? (['runtime', 'engine'] as const) : (['engine', 'runtime'] as const)) {
          local[level] = rates(localRun(level, c, periods, segP, pool, fft).slice(1), c, segP);
          row[level].push(...local[level]);
        }
        row.ratios.push(median(live) / median(local.engine));
      }
      flats.push(row);
      printFlat(row);
    }

    // Where the live agent's CPU goes: the V8 sampling profiler on one more flat run.
    const big = flats[flats.length - 1];
    const profSegP = segmentPeriodsFor(big.c);
    const prof = await liveRun(b, { channels: big.c, periods: profSegP * 5, mode: 'flat', schedule: constant, segmentPeriods: profSegP, recordTimes: false, profile: true });
    const us = (chPerCore: number): number => 1e6 / chPerCore;
    const [uLive, uRuntime, uEngine] = [us(median(big.live)), us(median(big.runtime)), us(median(big.engine))];
    console.log(
      `\n   at C = ${big.c}, us of CPU per channel-second of data (medians above): live ${uLive.toFixed(0)}, runtime ${uRuntime.toFixed(0)}, ` +
        `engine ${uEngine.toFixed(0)};\n   live - engine = ${(uLive - uEngine).toFixed(0)} (runtime - engine is within the run-to-run noise of about 15 %).`,
    );
    if (prof.profile) {
      console.log(`   V8 sampling profile of one more live flat run at C = ${big.c} (${prof.profile.sampledMs.toFixed(0)} ms sampled, idle left out), us/ch-s at the live median:`);
      for (const p of prof.profile.parts) if (p.share >= 0.005) console.log(`      ${p.part.padEnd(45)} ${f(100 * p.share, 1, 5)} %  ${f(uLive * p.share, 0, 5)} us/ch-s`);
      console.log('   functions with the most self time:');
      for (const p of prof.profile.functions.slice(0, 8)) console.log(`      ${p.name.slice(0, 60).padEnd(60)} ${f(100 * p.share, 1, 5)} %  (${p.part})`);
    }

    // 3: real time, C in steps from the flat-out wall throughput of the largest C.
    const base = Math.max(8, Math.floor(Number.isFinite(wallChannels(big)) ? wallChannels(big) : big.c));
    console.log(
      `\n3. real time: ${PACED_S} s of data per step, each period published when its data time comes. Kept up = every block handled,\n` +
        `   no drop, reset or gap in the agent's counters, no warning logged, and the lag (wall time from a block's data end to the\n` +
        `   agent having handled it) not growing: trend under ${MAX_LAG_SLOPE * 1000} ms per s of data after the first second, last lag under\n` +
        `   ${MAX_FINAL_LAG_S} s. Steps from the flat-out wall rate at C = ${big.c} (${base} channels).`,
    );
    console.log('      C  agent cores  lag p50 ms  lag max ms  trend ms/s  publisher late ms  machine cores  kept up');
    let largestKept: number | null = null;
    let smallestFailed: number | null = null;
    const tried = new Set<number>();
    const paced = async (c: number): Promise<boolean> => {
      tried.add(c);
      const periods = Math.round(PACED_S / BLOCK_S);
      const segP = 10;
      const r = await liveRun(b, { channels: c, periods, mode: 'paced', schedule: constant, segmentPeriods: segP, recordTimes: false, profile: false });
      const skip = Math.round(1 / BLOCK_S);
      const lags = [...r.lagS];
      const x = lags.slice(skip).map((_, i) => (i + skip) * BLOCK_S);
      const trend = slope(x, lags.slice(skip));
      const last = lags[lags.length - 1];
      const kept = r.complete && r.problems.length === 0 && trend < MAX_LAG_SLOPE && last < MAX_FINAL_LAG_S;
      const agentCores = median(r.segments.slice(1).map((s) => s.cpuS / s.wallS));
      console.log(
        `  ${f(c, 0, 5)} ${f(agentCores, 2, 12)} ${f(1000 * median(lags), 1, 11)} ${f(1000 * Math.max(...lags), 1, 11)} ${f(1000 * trend, 1, 11)} ` +
          `${f(r.publisher?.lateMaxMs, 1, 18)} ${f(r.machineCores, 2, 14)}  ${kept ? 'yes' : `no (${r.problems.join('; ') || 'lag grows'})`}`,
      );
      if (kept) largestKept = Math.max(largestKept ?? 0, c);
      else smallestFailed = Math.min(smallestFailed ?? Infinity, c);
      return kept;
    };
    const round4 = (v: number): number => Math.max(4, Math.round(v / 4) * 4);
    if (PACED_CHANNELS.length > 0) for (const c of PACED_CHANNELS) await paced(c);
    else for (const x of PACED_STEPS) if (!(await paced(round4(x * base)))) break;
    if (PACED_CHANNELS.length === 0 && largestKept !== null && smallestFailed !== null) {
      const mid = round4((largestKept + smallestFailed) / 2);
      if (!tried.has(mid)) await paced(mid);
    }

    // 4: alarm latency at real-time pace.
    const cycles: SpeedSchedule = { kind: 'cycles', leadS: 1.2, inS: ON_DELAY_S + 0.4, outS: OFF_DELAY_S + 0.4, cycles: RAISES };
    const latPeriods = Math.round((scheduleS(cycles) as number) / BLOCK_S);
    const lat = await liveRun(b, { channels: LATENCY_CHANNELS, periods: latPeriods, mode: 'paced', schedule: cycles, segmentPeriods: 10, recordTimes: true, profile: false });
    const raises = lat.alarms.filter((a) => a.event === 'raise');
    const latencies: number[] = [];
    const fromLast: number[] = [];
    let waitedNext = 0;
    /** Raises whose completing block ends short of the decision time in double arithmetic. */
    const shortS: number[] = [];
    const lastPublishBefore = (ms: number): number => {
      let best = -Infinity;
      for (const t of lat.times.values()) for (const p of [t.speedMs, ...t.blockMs]) if (p <= ms && p > best) best = p;
      return best;
    };
    for (const a of raises) {
      // The block that completes the on-delay: the first period whose data reaches t_s (1 us
      // allowance for the rounding of t_s in the record); its last channel's block goes last.
      let k = 0;
      while (k < latPeriods && periodStartS(lat.t0S, k + 1) < a.tS - 1e-6) k++;
      const t = lat.times.get(k);
      if (!t) continue;
      latencies.push(a.receivedMs - Math.max(t.speedMs, ...t.blockMs));
      fromLast.push(a.receivedMs - lastPublishBefore(a.receivedMs));
      // The engine decides at start + n x step; the block's end is its stamp + count / fs.
      const n = Math.round((a.tS - lat.t0S) / BLOCK_S);
      const decisionS = lat.t0S + n * BLOCK_S;
      const blockEndS = periodStartS(lat.t0S, n - 1) + BLOCK_SAMPLES / FS_HZ;
      if (decisionS - blockEndS > 1e-9) shortS.push(decisionS - blockEndS);
      const next = lat.times.get(k + 1);
      if (next && a.receivedMs > Math.max(next.speedMs, ...next.blockMs)) waitedNext++;
    }
    console.log(
      `\n4. alarm latency: ${LATENCY_CHANNELS} channels at real-time pace, on-delay ${ON_DELAY_S} s, speed stepped into the band and out ${RAISES} times.\n` +
        `   Wall time from publishing the last block whose data reaches the raise's t_s to a subscriber receiving the raise.`,
    );
    console.log(
      `   raises received ${raises.length} of ${RAISES}: median ${f(median(latencies), 1, 0)} ms, max ${f(Math.max(...latencies), 1, 0)} ms` +
        (lat.problems.length ? `; problems: ${lat.problems.join('; ')}` : ''),
    );
    if (waitedNext > 0) {
      console.log(
        `   ${waitedNext} of ${raises.length} raises came only after the NEXT period's blocks were published: the decision at t_s waited one\n` +
          `   more block. From the last publication before each raise to its receipt: median ${f(median(fromLast), 1, 0)} ms, max ${f(Math.max(...fromLast), 1, 0)} ms.`,
      );
      if (shortS.length > 0) {
        console.log(
          `   In ${shortS.length} of the raises the completing block's end (epoch stamp + count / fs) falls ${median(shortS).toExponential(1)} s (one double\n` +
            `   rounding step at ${lat.t0S.toExponential(1)} s) short of the decision time start + n x step, beyond the 1e-9 s the engine allows.`,
        );
      }
    }

    const live = median(big.live);
    const engine = median(big.engine);
    console.log(
      `\nconclusion: through ${broker.protocolVersion === 5 ? 'Mosquitto' : 'aedes'} the agent handles ${live.toFixed(0)} channels per core at C = ${big.c}, ` +
        `${(100 * (live / engine)).toFixed(0)} % of the engine alone (${engine.toFixed(0)}); this ${cpus().length}-core machine, publisher and broker included, kept up in real time ` +
        `with ${largestKept ?? 'none'} of the channel counts tried${smallestFailed !== null ? ` (not ${smallestFailed})` : ''}; alarm latency median ${median(latencies).toFixed(0)} ms, ` +
        `max ${Math.max(...latencies).toFixed(0)} ms. Bench took ${((performance.now() - benchStart) / 1000).toFixed(0)} s.`,
    );
  } finally {
    if (sub) await clearRetained(sub, prefixRoot).catch((e) => console.error(`retained clean-up failed: ${(e as Error).message}`));
    await sub?.endAsync();
    if (publisher) {
      publisher.send({ type: 'quit' });
      await stopChild(publisher.child);
    }
    await broker.close();
    rmSync(dir, { recursive: true, force: true });
  }
}

/** Empties every retained message left under the bench's prefix (a safety net: runs clear their own). */
async function clearRetained(sub: MqttClient, prefixRoot: string): Promise<void> {
  const left = new Set<string>();
  const onMessage = (topic: string, payload: Buffer, packet: { retain?: boolean }): void => {
    if (packet.retain && payload.length > 0) left.add(topic);
  };
  sub.on('message', onMessage);
  await sub.subscribeAsync(`${prefixRoot}/#`, { qos: 1 });
  await sleep(300);
  await sub.unsubscribeAsync(`${prefixRoot}/#`);
  sub.off('message', onMessage);
  await Promise.all([...left].map((t) => sub.publishAsync(t, '', { qos: 1, retain: true })));
}

await main();
