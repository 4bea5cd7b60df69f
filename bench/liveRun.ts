/**
 * One run of the live bench through the broker: the publisher process plays a gateway, and in
 * this process either the whole agent (`receiver: 'agent'`) or only an MQTT client connected
 * and tuned as the agent's is, acknowledging every block and doing nothing else with it
 * (`receiver: 'mqtt'`: what receiving costs before the agent does any work, the floor under
 * the live figure). CPU, wall and handler time are checkpointed per segment of blocks.
 */
import { writeFileSync } from 'node:fs';
import { cpus } from 'node:os';
import { join } from 'node:path';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { Agent } from '../src/agent/agent.ts';
import { agentConnectOptions } from '../src/agent/connectOptions.ts';
import { tuneAgentSocket } from '../src/agent/socketWrites.ts';
import { memoryLogger } from '../test/support/liveRig.ts';
import { ASSET_ID, BLOCK_S, benchMapText, benchTopics, blockTimeS, type SpeedSchedule } from './benchStream.ts';
import { startProfile, type ProfileShares } from './cpuProfile.ts';
import type { PublishPlan } from './livePublisher.ts';
import { bounded, cpuS, debug, machineTicks, sleep, wallMs, type Broker, type Publisher } from './liveRig.ts';

/** What every run of one bench shares (from its command line and constants). */
export interface LiveSettings {
  qos: 0 | 1;
  /** TCP_NODELAY on the agent's socket, set from outside (--nodelay). */
  nodelay: boolean;
  /** The agent's worker threads (`qband run --workers`). */
  workers: number | 'auto';
  onDelayS: number;
  offDelayS: number;
  /** Flat out: blocks the publisher may run ahead of what was handled; credits every so many. */
  windowBlocks: number;
  creditEvery: number;
  /** Most publishes awaiting their acknowledgement in the publisher. */
  inflight: number;
  /** A run is over when no block came for this long after the publisher finished. */
  stallMs: number;
}

/** Counters that mean a block was lost, refused or its history reset. */
const PROBLEM_COUNTER = /^(drop_|reset_|seq_(duplicate|late|missing|gap|rate_change|time_jump|sender_restart)$)/;

export interface Segment {
  cpuS: number;
  wallS: number;
  /** Time inside the agent's message handler (live runs). */
  handlerS: number;
}

export interface LiveSpec {
  channels: number;
  periods: number;
  mode: 'flat' | 'paced';
  schedule: SpeedSchedule;
  /** Checkpoints (CPU, wall, handler time) every so many periods of blocks handled. */
  segmentPeriods: number;
  recordTimes: boolean;
  profile: boolean;
  /** The whole agent (default), or only an MQTT client as the agent's that acknowledges each block. */
  receiver?: 'agent' | 'mqtt';
}

export interface LiveResult {
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

export interface Bench {
  broker: Broker;
  publisher: Publisher;
  sub: MqttClient;
  dir: string;
  prefixRoot: string;
  runs: number;
  settings: LiveSettings;
}

export async function liveRun(b: Bench, spec: LiveSpec): Promise<LiveResult> {
  const n = ++b.runs;
  const prefix = `${b.prefixRoot}/r${n}`;
  const topics = benchTopics(prefix, spec.channels);
  const mapPath = join(b.dir, `map-${n}.yaml`);
  writeFileSync(mapPath, benchMapText({ prefix, brokerUrl: b.broker.url, channels: spec.channels, onDelayS: b.settings.onDelayS, offDelayS: b.settings.offDelayS }));
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
    if (b.settings.nodelay) agentClient.on('connect', () => (agentClient?.stream as unknown as { setNoDelay?: (v: boolean) => void }).setNoDelay?.(true));
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
    if (!paced && processed % b.settings.creditEvery === 0) b.publisher.send({ type: 'credit', processed });
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
  let agent: Agent | null = null;
  if ((spec.receiver ?? 'agent') === 'agent') {
    agent = await Agent.start(
      { mapPath, protocolVersion: b.broker.protocolVersion, clientId: `qbench-agent-${process.pid}-${n}`, watchMap: false, tickMs: 1000, workers: b.settings.workers },
      { logger, connect },
    );
    await agent.ready();
  } else {
    // The agent's connection, socket settings and subscriptions, and nothing behind them (a
    // clean session: the broker keeps nothing of it after the run).
    const options = agentConnectOptions({
      clientId: `qbench-recv-${process.pid}-${n}`,
      protocolVersion: b.broker.protocolVersion,
      sessionExpiryS: 0,
      will: { topic: `${prefix}/receiver/status`, payload: Buffer.from('offline') },
    });
    const client = connect(b.broker.url, { ...options, clean: true });
    tuneAgentSocket(client);
    await new Promise<void>((resolve) => client.once('connect', () => resolve()));
    await client.subscribeAsync([...topics.samples, topics.speed], { qos: 1 });
  }
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
    qos: b.settings.qos,
    schedule: spec.schedule,
    window: b.settings.windowBlocks,
    inflight: b.settings.inflight,
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
    else if (publisherDone && now - since > b.settings.stallMs) break;
    if (now > deadlineMs) break;
  }
  debug(`run ${n}: ${complete ? 'complete' : 'incomplete'}, ${processed} of ${expected}`);
  const ticks1 = ticksEnd ?? ticksAtPublished ?? machineTicks();
  const profile = stopProfile ? await stopProfile() : null;
  if (!publisherDone) {
    b.publisher.send({ type: 'abort' });
    for (let i = 0; i < 100 && !publisherDone; i++) await sleep(20);
  }

  const problems: string[] = [];
  if (agent) await checkCounters(b, prefix, expected, () => latestState, problems);
  else if (processed !== expected) problems.push(`${processed} of ${expected} blocks received`);
  const warnings = lines().filter((l) => Number(l.level) >= 40).length;
  if (warnings > 0) problems.push(`${warnings} warning lines logged`);
  if (!complete) problems.push(`${processed} of ${expected} blocks handled`);

  debug(`run ${n}: counters read`);
  b.sub.off('message', onSub);
  await bounded(b.sub.unsubscribeAsync([topics.alarm, topics.state]), 'unsubscribe');
  await stopReceiver(b, agent, agentClient as unknown as MqttClient, topics.state);
  debug(`run ${n}: agent stopped`);

  const machineCores =
    ticks0 && ticks1 && ticks1.total > ticks0.total ? ((ticks1.busy - ticks0.busy) / (ticks1.total - ticks0.total)) * cpus().length : null;
  return { complete, t0S, segments, problems, publisher: publisherDone, machineCores, lagS, alarms, times, profile };
}

/**
 * The agent's own counters: an operator command that changes nothing makes it publish its
 * state at once (unshelve of a pair that is not shelved). Adds what went wrong to `problems`.
 */
export async function checkCounters(b: Bench, prefix: string, expected: number, state: () => { counters?: Record<string, number> } | null, problems: string[]): Promise<void> {
  await bounded(b.sub.publishAsync(`${prefix}/${ASSET_ID}/command`, JSON.stringify({ action: 'unshelve', component: 'frame-mode', order: 'o0', by: 'bench' }), { qos: 1 }), 'command');
  const counters = (): Record<string, number> | undefined => state()?.counters;
  for (let i = 0; i < 100 && !(Number(counters()?.commands_unshelve) > 0); i++) await sleep(20);
  const final = counters();
  if (!final || !(Number(final.commands_unshelve) > 0)) problems.push('no state message with counters');
  else {
    if (final.blocks_received !== expected) problems.push(`blocks_received ${final.blocks_received} of ${expected}`);
    for (const [k, v] of Object.entries(final)) if (PROBLEM_COUNTER.test(k) && v > 0) problems.push(`${k} ${v}`);
  }
}

/** Stops the agent (or the bare receiver) and empties the retained messages it left. */
export async function stopReceiver(b: Bench, agent: Agent | null, client: MqttClient, stateTopic: string): Promise<void> {
  if (!agent) {
    await bounded(client.endAsync(), 'receiver stop');
    return;
  }
  const statusTopic = agent.statusTopic;
  const stopped = await bounded(
    agent.stop().then(() => true, () => false),
    'agent stop',
  );
  if (!stopped) {
    // Still working through a backlog: cut the connection (the broker then publishes the
    // agent's last will, retained, which the clean-up below empties again).
    client.end(true);
    await sleep(300);
  }
  await bounded(Promise.all([stateTopic, statusTopic].map((t) => b.sub.publishAsync(t, '', { qos: 1, retain: true }))), 'retained clean-up');
}
