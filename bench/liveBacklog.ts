/**
 * The live bench's saturated level: the agent draining a backlog at full speed.
 *
 * Flat out (liveRun.ts) the publisher, the broker and the agent share the machine's cores, so
 * the agent is never saturated: it wakes for a few blocks at a time and pays per-wake-up costs
 * a busy agent would spread over many blocks. Here the blocks are all waiting before the agent
 * starts:
 *
 *   1. the agent starts with its persistent session (clean false, a stable client id, MQTT 5
 *      session expiry: the map's default) and a state directory (as `qband run`), subscribes,
 *      and stops; the broker keeps the session;
 *   2. the publisher process publishes the whole backlog at QoS 1 and waits for every PUBACK:
 *      the broker holds it all in the absent agent's queue (the bench's own Mosquitto, whose
 *      queue bounds are above the backlog: ownBroker.ts);
 *   3. the agent starts again under the same client id, and nothing else runs: it drains the
 *      backlog as fast as it can. Measured in this process, from the arrival of the first
 *      sample block to the handling of the last: CPU (process.cpuUsage, every thread) and wall
 *      time. The agent's own counters (state message) must show every block, no drop or gap.
 */
import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { Agent } from '../src/agent/agent.ts';
import { memoryLogger } from '../test/support/liveRig.ts';
import type { RealFft } from '../src/manipulation/realFft.ts';
import { BLOCK_S, benchMapText, benchTopics, type SpeedSchedule } from './benchStream.ts';
import { startProfile, type ProfileShares } from './cpuProfile.ts';
import type { FromPublisher, PublishPlan } from './livePublisher.ts';
import { f, printProfile, segmentPeriodsFor, SEGMENT_CHANNEL_S, sum } from './liveReport.ts';
import { bounded, connectOnce, cpuS, debug, median, Publisher, sleep, startOsMeter, stopChild, wallMs } from './liveRig.ts';
import { checkCounters, stopReceiver, type Bench, type Segment } from './liveRun.ts';
import { localRun } from './localRun.ts';
import { startOwnMosquitto } from './ownBroker.ts';

export interface BacklogSpec {
  channels: number;
  periods: number;
  /** Checkpoints every so many periods of blocks handled. */
  segmentPeriods: number;
  schedule: SpeedSchedule;
  profile: boolean;
}

export interface BacklogResult {
  complete: boolean;
  /** Sample blocks in the backlog. */
  blocks: number;
  /** The backlog's publication (publisher process, every PUBACK received). */
  publishWallS: number;
  /** Agent.start to the first sample block: connection, session, runtimes built. */
  startWallS: number;
  /** First sample block received to the last one handled; kernel, page faults and GC pauses over the same span. */
  drain: { cpuS: number; wallS: number; systemS: number; faults: number; gcPauseS: number };
  segments: Segment[];
  /** The broker's answer to the returning agent: its session was kept. */
  sessionPresent: boolean | null;
  problems: string[];
  profile: ProfileShares | null;
}

export async function backlogRun(b: Bench, spec: BacklogSpec): Promise<BacklogResult> {
  const n = ++b.runs;
  const prefix = `${b.prefixRoot}/s${n}`;
  const topics = benchTopics(prefix, spec.channels);
  const mapPath = join(b.dir, `map-s${n}.yaml`);
  writeFileSync(mapPath, benchMapText({ prefix, brokerUrl: b.broker.url, channels: spec.channels, onDelayS: b.settings.onDelayS, offDelayS: b.settings.offDelayS }));
  const clientId = `qbench-backlog-${process.pid}-${n}`;
  const options = { mapPath, protocolVersion: b.broker.protocolVersion, clientId, watchMap: false, tickMs: 1000, workers: b.settings.workers, stateDir: join(b.dir, `state-s${n}`) };
  const sampleTopics = new Set(topics.samples);
  const expected = spec.channels * spec.periods;
  const problems: string[] = [];

  // 1. The session: subscribed once, then the agent stops (the broker keeps the session).
  const first = memoryLogger();
  const once = await Agent.start(options, { logger: first.logger });
  await once.ready();
  await once.stop();

  // 2. The backlog, every block acknowledged by the broker before the agent returns.
  const pubStart = wallMs();
  const done = new Promise<Extract<FromPublisher, { type: 'done' }>>((resolve) => {
    b.publisher.onMessage((m) => void (m.type === 'done' && m.id === n && resolve(m)));
  });
  const plan: PublishPlan = {
    id: n,
    mode: 'flat',
    prefix,
    channels: spec.channels,
    periods: spec.periods,
    t0S: Date.now() / 1000 - spec.periods * BLOCK_S - 10,
    qos: 1,
    schedule: spec.schedule,
    window: Number.MAX_SAFE_INTEGER, // no credits: nothing is taken until the agent returns
    inflight: b.settings.inflight,
    recordTimes: false,
  };
  b.publisher.send({ type: 'run', plan });
  const published = await bounded(done, 'backlog publication', 60_000 + expected * 5);
  const publishWallS = (wallMs() - pubStart) / 1000;
  if (!published) {
    b.publisher.send({ type: 'abort' });
    problems.push('backlog not published in time');
  } else if (published.published !== expected) problems.push(`${published.published} of ${expected} blocks published`);
  debug(`backlog ${n}: ${published?.published ?? 0} blocks published in ${publishWallS.toFixed(1)} s`);

  // 3. The drain: one listener before the agent's and one after it time the handling.
  let agentClient: MqttClient | null = null;
  const connect = (url: string, o: IClientOptions): MqttClient => {
    agentClient = mqtt.connect(url, o);
    agentClient.on('message', before);
    return agentClient;
  };
  let processed = 0;
  let firstAt: { cpuS: number; wallS: number } | null = null;
  let lastAt: { cpuS: number; wallS: number } | null = null;
  let mark = { cpuS: 0, wallS: 0 };
  let osMeter: ReturnType<typeof startOsMeter> | null = null;
  let os: ReturnType<ReturnType<typeof startOsMeter>> | null = null;
  const segments: Segment[] = [];
  const segmentBlocks = spec.segmentPeriods * spec.channels;
  function before(topic: string): void {
    if (firstAt === null && sampleTopics.has(topic)) {
      osMeter = startOsMeter();
      firstAt = { cpuS: cpuS(), wallS: wallMs() / 1000 };
      mark = firstAt;
    }
  }
  function after(topic: string): void {
    if (!sampleTopics.has(topic)) return;
    processed++;
    if (processed % segmentBlocks === 0 || processed === expected) {
      const now = { cpuS: cpuS(), wallS: wallMs() / 1000 };
      if (processed % segmentBlocks === 0) segments.push({ cpuS: now.cpuS - mark.cpuS, wallS: now.wallS - mark.wallS, handlerS: 0 });
      mark = now;
      if (processed === expected) {
        lastAt = now;
        os = osMeter?.() ?? null;
      }
    }
  }

  let latestState: { counters?: Record<string, number> } | null = null;
  const onSub = (topic: string, payload: Buffer): void => {
    if (topic === topics.state && payload.length > 0) latestState = JSON.parse(payload.toString()) as { counters?: Record<string, number> };
  };
  b.sub.on('message', onSub);
  await b.sub.subscribeAsync(topics.state, { qos: 1 });

  const stopProfile = spec.profile ? await startProfile() : null;
  const second = memoryLogger();
  const startWall = wallMs() / 1000;
  const agent = await Agent.start(options, { logger: second.logger, connect });
  (agentClient as unknown as MqttClient).on('message', after);
  const deadlineMs = performance.now() + 30_000 + expected * 2;
  for (let seen = -1, since = performance.now(); processed < expected; await sleep(20)) {
    const now = performance.now();
    if (processed !== seen) [seen, since] = [processed, now];
    else if (now - since > b.settings.stallMs + 3000 || now > deadlineMs) break;
  }
  const profile = stopProfile ? await stopProfile() : null;
  const complete = processed === expected && lastAt !== null && firstAt !== null;
  debug(`backlog ${n}: ${processed} of ${expected} handled; ch/CPU-s by segment ${segments.map((g) => ((segmentBlocks * BLOCK_S) / g.cpuS).toFixed(0)).join(' ')}`);

  await checkCounters(b, prefix, expected, () => latestState, problems);
  if (!complete) problems.push(`${processed} of ${expected} blocks handled`);
  const connected = second.lines().find((l) => l.code === 'QB_I_CONNECTED');
  const sessionPresent = connected ? connected.session_present === true : null;
  if (sessionPresent !== true) problems.push('the broker did not keep the session');
  const warnings = [...first.lines(), ...second.lines()].filter((l) => Number(l.level) >= 40);
  if (warnings.length > 0) problems.push(`${warnings.length} warning lines logged (${String(warnings[0].code)}: ${String(warnings[0].msg)})`);

  b.sub.off('message', onSub);
  await bounded(b.sub.unsubscribeAsync(topics.state), 'unsubscribe');
  await stopReceiver(b, agent, agentClient as unknown as MqttClient, topics.state);
  // The session is over: a clean connection under its client id discards it at the broker.
  await connectOnce(b.broker.url, b.broker.protocolVersion, clientId).then((c) => c.endAsync(), () => undefined);

  const f = firstAt as { cpuS: number; wallS: number } | null;
  const l = lastAt as { cpuS: number; wallS: number } | null;
  const o = os as ReturnType<ReturnType<typeof startOsMeter>> | null;
  return {
    complete,
    blocks: expected,
    publishWallS,
    startWallS: f ? f.wallS - startWall : Number.NaN,
    drain: f && l && o ? { cpuS: l.cpuS - f.cpuS, wallS: l.wallS - f.wallS, ...o } : { cpuS: Number.NaN, wallS: Number.NaN, systemS: Number.NaN, faults: Number.NaN, gcPauseS: Number.NaN },
    segments,
    sessionPresent,
    problems,
    profile,
  };
}

export interface SaturatedRow {
  c: number;
  blocks: number;
  /** Channels per CPU-second of the whole drain, and of the engine alone on the same blocks, per round. */
  live: number[];
  engine: number[];
  ratios: number[];
  drainCpuS: number[];
  drainWallS: number[];
  /** Of the drain: system CPU, page faults and the main thread's GC pauses. */
  drainSystemS: number[];
  drainFaults: number[];
  drainGcPauseS: number[];
  /** System CPU of the engine alone on the same blocks. */
  engineSystemS: number[];
  publishWallS: number[];
  problems: string[];
}

/**
 * Level 5 of bench:live: for each C, `rounds` backlogs of `backlogChS` channel-seconds drained
 * by the agent, alternating with the engine alone on the same blocks in this process
 * (localRun, as levels 1-2), then a V8 profile of one more drain at the largest C. Returns
 * null, having said why, when the bench's own Mosquitto cannot be started.
 */
export async function saturatedLevel(
  b: Omit<Bench, 'broker' | 'publisher' | 'sub'>,
  channels: number[],
  backlogChS: number,
  rounds: number,
  pool: Uint8Array[],
  fft: RealFft,
  schedule: SpeedSchedule,
): Promise<SaturatedRow[] | null> {
  const periodsFor = (c: number): number => {
    const segP = segmentPeriodsFor(c);
    return Math.max(2, Math.round(backlogChS / (c * BLOCK_S) / segP)) * segP;
  };
  const most = Math.max(...channels.map((c) => (c + 1) * periodsFor(c)));
  const started = await startOwnMosquitto({ messages: 2 * most + 1000, bytes: 2 * most * (pool[0].length + 200) });
  console.log(`\n5. saturated: a backlog drained by the agent at full speed, through ${'broker' in started ? started.broker.name : 'the bench\'s own Mosquitto'}`);
  if (!('broker' in started)) {
    console.log(`   not run: ${started.notRun}.`);
    return null;
  }
  const broker = started.broker;
  let publisher: Publisher | null = null;
  let sub: MqttClient | null = null;
  try {
    publisher = await Publisher.start(broker);
    sub = await connectOnce(broker.url, broker.protocolVersion, `qbench-sat-sub-${process.pid}`);
    const bench: Bench = { ...b, broker, publisher, sub };
    console.log(
      `   The agent (its own thread, a state directory as qband run) subscribes with its persistent session and stops; the\n` +
        `   publisher then publishes ~${backlogChS} channel-s of blocks (and their speed records) at QoS 1, every one acknowledged by the\n` +
        `   broker; the agent starts again under the same client id and drains them with nothing else running. drain: first\n` +
        `   block received to last handled, CPU of this process (process.cpuUsage) and wall. live = channel-s of data per CPU-s\n` +
        `   of the drain, engine = the same blocks into the engine alone in this process (as levels 1-2), both from the end of\n` +
        `   their first segment of >= ${SEGMENT_CHANNEL_S} channel-s (a fresh engine's warm-up) to the last block. ${rounds} rounds, live and engine\n` +
        `   alternating; medians, ratio range over rounds. agent cores = drain CPU / wall (below 1: waiting for the broker or\n` +
        `   for a core). overhead = the agent's CPU per block beyond the engine's. Of the drain, per block: kernel = system CPU\n` +
        `   of the drain / of the engine alone (the socket's receive path, the acknowledgements' sends, page faults), GC = the\n` +
        `   drain's garbage-collection pauses on the main thread (the engine alone has its own), faults = the drain's page faults.`,
    );
    console.log('      C  blocks  drain CPU s  drain wall s  agent cores     live  engine  live/eng          overhead us/block  kernel us (eng)  GC us  faults  publish s  problems');
    const rows: SaturatedRow[] = [];
    for (const c of channels) {
      const periods = periodsFor(c);
      const segP = segmentPeriodsFor(c);
      const row: SaturatedRow = { c, blocks: c * periods, live: [], engine: [], ratios: [], drainCpuS: [], drainWallS: [], drainSystemS: [], drainFaults: [], drainGcPauseS: [], engineSystemS: [], publishWallS: [], problems: [] };
      // Both measured after their first segment (a fresh engine's first blocks cost several
      // times the rest: its state touched for the first time), to the last block.
      const chS = c * (periods - segP) * BLOCK_S;
      const rate = (segments: Segment[]): number => (segments.length === periods / segP ? chS / sum(segments.slice(1).map((g) => g.cpuS)) : Number.NaN);
      for (let round = 0; round < rounds; round++) {
        const engine = (): number => {
          const os = startOsMeter();
          const segments = localRun('engine', c, periods, segP, pool, fft, b.settings);
          row.engineSystemS.push(os().systemS);
          return rate(segments);
        };
        const e0 = round % 2 ? engine() : Number.NaN;
        const r = await backlogRun(bench, { channels: c, periods, segmentPeriods: segP, schedule, profile: false });
        const e = round % 2 ? e0 : engine();
        row.live.push(rate(r.segments));
        row.engine.push(e);
        row.ratios.push(rate(r.segments) / e);
        row.drainCpuS.push(r.drain.cpuS);
        row.drainWallS.push(r.drain.wallS);
        row.drainSystemS.push(r.drain.systemS);
        row.drainFaults.push(r.drain.faults);
        row.drainGcPauseS.push(r.drain.gcPauseS);
        row.publishWallS.push(r.publishWallS);
        row.problems.push(...r.problems);
      }
      rows.push(row);
      const live = median(row.live);
      const engine = median(row.engine);
      const ratios = `${f(live / engine, 2, 4)} (${Math.min(...row.ratios).toFixed(2)}-${Math.max(...row.ratios).toFixed(2)})`;
      const overheadUs = (1e6 / live - 1e6 / engine) * BLOCK_S;
      const perBlock = (a: number[]): number => median(a.map((v) => v / row.blocks));
      console.log(
        `  ${f(c, 0, 5)} ${f(row.blocks, 0, 7)} ${f(median(row.drainCpuS), 2, 12)} ${f(median(row.drainWallS), 2, 13)} ${f(median(row.drainCpuS) / median(row.drainWallS), 2, 12)} ` +
          `${f(live)} ${f(engine, 0, 7)}  ${ratios.padEnd(16)} ${f(overheadUs, 1, 18)} ${f(1e6 * perBlock(row.drainSystemS), 1, 10)} (${f(1e6 * perBlock(row.engineSystemS), 1, 3)}) ${f(1e6 * perBlock(row.drainGcPauseS), 1, 6)} ${f(perBlock(row.drainFaults), 2, 7)} ` +
          `${f(median(row.publishWallS), 1, 10)}  ${[...new Set(row.problems)].join('; ') || 'none'}`,
      );
    }
    const big = rows[rows.length - 1];
    const prof = await backlogRun(bench, { channels: big.c, periods: periodsFor(big.c), segmentPeriods: segmentPeriodsFor(big.c), schedule, profile: true });
    if (prof.profile) {
      const uLive = 1e6 / median(big.live);
      console.log(`   V8 sampling profile of one more drain at C = ${big.c}, from the agent's start (${prof.profile.sampledMs.toFixed(0)} ms sampled, idle left out), us/ch-s at the live median:`);
      printProfile(prof.profile, uLive);
    }
    return rows;
  } finally {
    await sub?.endAsync();
    if (publisher) {
      publisher.send({ type: 'quit' });
      await stopChild(publisher.child);
    }
    await broker.close();
  }
}
