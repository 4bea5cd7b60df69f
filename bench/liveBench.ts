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
 *    alternating with the live runs (the machine is shared; its load drifts), and through the
 *    broker into a bare MQTT client connected and tuned as the agent's that only acknowledges
 *    each block (what receiving alone costs: the floor under any live figure): the engine alone
 *    (decodeSampleBlock + AssetEngine.pushSpeed/pushChannel) and the asset runtime
 *    (AssetRuntime.onMessage: decode, sequencer, engine, state and alarm JSON). The ratio
 *    live / engine, and a V8 sampling profile of one more live run, say where the time goes.
 *    "Kept up" in real time (3) is judged from the agent's own counters (read from its state
 *    message, made to publish by a no-op operator command) and from the lag of every block.
 * 3. Keeping up in real time: blocks published when their data time has come, C in a few steps.
 * 4. Alarm latency: a speed stepping into the band and out again; wall time from the publication
 *    of the block that completes the on-delay to the alarm reaching a subscriber.
 * 5. Saturated (liveBacklog.ts): a backlog published while the agent is away, held in its
 *    persistent session at a Mosquitto the bench starts itself (ownBroker.ts; not run, and said,
 *    without the binary), drained at full speed; CPU of the drain against the engine alone.
 *
 * Broker: Mosquitto on 127.0.0.1:1883 (MQTT 5) if it answers, else aedes in a child process
 * (MQTT 3.1.1). Topics live under qbench-<pid>/; retained messages are cleared at the end.
 *
 * Parts: liveRig.ts (broker, publisher process, helpers), liveRun.ts (one run through the broker),
 * localRun.ts (the same blocks without one), liveReport.ts (tables), liveLatency.ts (section 4),
 * liveBacklog.ts and ownBroker.ts (section 5).
 *
 * Run: npm run bench:live. Takes about 2 to 3 minutes. Options (after --): --channels 16,64,256 (flat-out
 * steps), --paced 200,400 (real-time steps instead of the automatic ones), --qos 0|1 (sample
 * blocks; default 1), --latency-channels 8, --raises 5, --broker <url>|aedes, --nodelay (TCP_NODELAY
 * on the agent's socket, set from outside), --workers <n|auto> (the agent's worker threads; default 0,
 * its own thread, as before worker threads), --backlog 2048 (channel-seconds of the saturated level's
 * backlog), --only saturated (that level alone). QBENCH_DEBUG=1 prints the steps of each run;
 * QBENCH_PROFILE_OUT=<dir> keeps every V8 profile; QBENCH_MOSQUITTO names the mosquitto binary.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { cpus, tmpdir } from 'node:os';
import { join } from 'node:path';
import type { MqttClient } from 'mqtt';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';
import { BLOCK_S, IN_BAND_RPM, blockPool, type SpeedSchedule } from './benchStream.ts';
import { alarmLatency } from './liveLatency.ts';
import { f, printFlat, printProfile, printReceive, rates, segmentPeriodsFor, slope, wallChannels, SEGMENT_CHANNEL_S, type FlatRow } from './liveReport.ts';
import { clearRetained, connectOnce, median, pickBroker, stopChild, Publisher } from './liveRig.ts';
import { liveRun, type Bench, type LiveSettings } from './liveRun.ts';
import { localRun } from './localRun.ts';
import { benchArgs, wholeNumber } from './benchArgs.ts';
import { saturatedLevel } from './liveBacklog.ts';

const USAGE = `Usage: npm run bench:live [-- options]

The live agent through a real MQTT broker against the engine alone on the same blocks, in one
run: flat out, kept up in real time, alarm latency, and a backlog drained at full speed
(saturated). Channels are 25.6 kHz float32 in 0.1 s binary blocks. Takes 2 to 3 minutes.

Options:
  --channels <list>         flat-out steps, channels (default 16,64,256)
  --paced <list>            real-time steps instead of the ones chosen from the flat-out results
  --qos <0|1>               QoS of the sample blocks (default 1)
  --latency-channels <n>    channels while the alarm latency is timed (default 8)
  --raises <n>              raises timed for the latency (default 5)
  --broker <url|aedes>      broker to use (default Mosquitto on 127.0.0.1:1883 if it answers,
                            else aedes in a child process)
  --nodelay                 TCP_NODELAY on the agent's socket
  --workers <n|auto>        the agent's worker threads (default 0: its own thread)
  --backlog <channel-s>     data in the saturated level's backlog (default 2048)
  --rounds <n>              rounds of the flat-out and saturated levels, medians over them
                            (default 3; this machine's speed moves from round to round)
  --only saturated          that level alone (about 20 s)
  -h, --help                this text

Environment: QBENCH_DEBUG=1 prints the steps of each run; QBENCH_PROFILE_OUT=<dir> keeps every
V8 profile; QBENCH_MOSQUITTO names the mosquitto binary of the saturated level.

Example: npm run bench:live -- --only saturated --channels 16
`;

const args = benchArgs(
  {
    channels: { type: 'string', default: '16,64,256' },
    qos: { type: 'string', default: '1' },
    'latency-channels': { type: 'string', default: '8' },
    raises: { type: 'string', default: '5' },
    paced: { type: 'string', default: '' },
    broker: { type: 'string', default: '' },
    nodelay: { type: 'boolean', default: false },
    workers: { type: 'string', default: '0' },
    backlog: { type: 'string', default: '2048' },
    rounds: { type: 'string', default: '3' },
    only: { type: 'string', default: '' },
  },
  USAGE,
);
if (args.only !== '' && args.only !== 'saturated') {
  process.stderr.write(`--only takes 'saturated', got '${args.only}'\n\n${USAGE}`);
  process.exit(2);
}
/** Real-time steps given on the command line (else chosen from the flat-out results). */
const PACED_CHANNELS = String(args.paced).split(',').filter(Boolean).map(Number);
const FLAT_CHANNELS = String(args.channels).split(',').map(Number);
const LATENCY_CHANNELS = Number(args['latency-channels']);
const RAISES = Number(args.raises);
/** Rounds of the flat-out level (live, receive, runtime, engine) and of the saturated one; measured segments per run (after a warm-up one). */
const ROUNDS = wholeNumber(args.rounds, 'rounds', 1, USAGE);
const ROUND_SEGMENTS = 4;
const SETTINGS: LiveSettings = {
  qos: Number(args.qos) === 0 ? 0 : 1,
  nodelay: Boolean(args.nodelay),
  // The live agent's worker threads (`qband run --workers`); 0 keeps the figures comparable with earlier runs.
  workers: args.workers === 'auto' ? 'auto' : Number(args.workers),
  onDelayS: 2,
  offDelayS: 1,
  windowBlocks: 500,
  creditEvery: 100,
  inflight: 16,
  stallMs: 1500,
};
/** Keep-up: seconds of data per step; the lag trend that still counts as keeping up (s per s). */
const PACED_S = 5;
const MAX_LAG_SLOPE = 0.02;
const MAX_FINAL_LAG_S = 1;
/**
 * Real-time steps, as fractions of the flat-out wall rate; a midpoint is tried after the first
 * failure. When even the first fails, the count is halved, at most DOWN_STEPS times, until one
 * is kept up with (then the midpoint as before).
 */
const PACED_STEPS = [0.6, 0.85, 1.1];
const DOWN_STEPS = 2;

async function main(): Promise<void> {
  const benchStart = performance.now();
  const broker = await pickBroker(String(args.broker));
  const dir = mkdtempSync(join(tmpdir(), 'qbench-'));
  const prefixRoot = `qbench-${process.pid}`;
  let publisher: Publisher | null = null;
  let sub: MqttClient | null = null;
  try {
    publisher = await Publisher.start(broker);
    sub = await connectOnce(broker.url, broker.protocolVersion, `qbench-sub-${process.pid}`);
    const b: Bench = { broker, publisher, sub, dir, prefixRoot, runs: 0, settings: SETTINGS };
    const pool = blockPool();
    const fft = await createRealFft(8192);
    const constant: SpeedSchedule = { kind: 'constant', rpm: IN_BAND_RPM };
    console.log(
      `qband live bench, broker: ${broker.name}\n` +
        `  25.6 kHz float32 channels in 0.1 s binary v1 blocks, QoS ${SETTINGS.qos}, one topic per channel; speed records on a speed topic,\n` +
        `  10 a second (${IN_BAND_RPM} rpm, 1X inside the frame mode's band); frames 8192, 50 % overlap, 4 averages, decimation 1\n` +
        `  (as npm run bench). Publisher: a child process. Agent and local runs: this process. Machine: ${cpus().length} cores.\n`,
    );

    // Warm-up: JIT of the agent, the engine and the runtime in this process.
    await liveRun(b, { channels: 16, periods: 30, mode: 'flat', schedule: constant, segmentPeriods: 10, recordTimes: false, profile: false });
    localRun('engine', 16, 30, 10, pool, fft, SETTINGS);
    localRun('runtime', 16, 30, 10, pool, fft, SETTINGS);
    await liveRun(b, { channels: 16, periods: 30, mode: 'flat', schedule: constant, segmentPeriods: 10, recordTimes: false, profile: false, receiver: 'mqtt' });

    const levels = await flatAndPaced(b, pool, fft, constant);
    // 5: saturated, through the bench's own Mosquitto (a queue that holds the backlog).
    const saturated = await saturatedLevel(b, FLAT_CHANNELS, Number(args.backlog), ROUNDS, pool, fft, constant);
    if (levels) {
      const { big, largestKept, smallestFailed, latencies } = levels;
      const live = median(big.live);
      const engine = median(big.engine);
      const sat = saturated?.[saturated.length - 1];
      console.log(
        `\nconclusion: through ${broker.protocolVersion === 5 ? 'Mosquitto' : 'aedes'} the agent handles ${live.toFixed(0)} channels per core at C = ${big.c}, ` +
          `${(100 * (live / engine)).toFixed(0)} % of the engine alone (${engine.toFixed(0)}); ` +
          (sat ? `draining a backlog at full speed ${median(sat.live).toFixed(0)}, ${(100 * (median(sat.live) / median(sat.engine))).toFixed(0)} % of the engine (${median(sat.engine).toFixed(0)}); ` : 'saturated level not run; ') +
          `this ${cpus().length}-core machine, publisher and broker included, kept up in real time ` +
          `with ${largestKept ?? 'none'} of the channel counts tried${smallestFailed !== null ? ` (not ${smallestFailed})` : ''}; alarm latency median ${median(latencies).toFixed(0)} ms, ` +
          `max ${Math.max(...latencies).toFixed(0)} ms.`,
      );
    }
    console.log(`Bench took ${((performance.now() - benchStart) / 1000).toFixed(0)} s.`);
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

/** Levels 1 to 4 (skipped with --only saturated). */
async function flatAndPaced(b: Bench, pool: Uint8Array[], fft: RealFft, constant: SpeedSchedule) {
  if (args.only === 'saturated') return null;
  // 1 and 2: flat out; live, runtime and engine on the same blocks, in alternating rounds so
  // that all three see the same machine (it is shared: its load drifts over seconds).
  console.log(
    `1-2. flat out. ch/core = channel-s of data per CPU-s of this process (process.cpuUsage), median of segments of >= ${SEGMENT_CHANNEL_S}\n` +
      `     channel-s; ${ROUNDS} rounds of live, receive, runtime and engine in turn, ${ROUND_SEGMENTS} segments each after a warm-up one.\n` +
      `     receive: the same blocks through the broker into an MQTT client as the agent's that only acknowledges them.\n` +
      `     live/eng: ratio of the medians (range over rounds). wall ch: channel-s of data per wall-second of the live runs (publisher,\n` +
      `     broker and agent sharing the machine). in handler: share of the agent's CPU spent inside its MQTT message handler.\n` +
      `     machine: busy cores of the whole machine (every process, others' too).`,
  );
  console.log('      C data s     live  runtime   engine  receive  live/eng          wall ch  agent  in handler  publisher  machine  drops and gaps');
  console.log('                ch/core  ch/core  ch/core  ch/core                            cores               cores    cores');
  const flats: FlatRow[] = [];
  for (const c of FLAT_CHANNELS) {
    const segP = segmentPeriodsFor(c);
    const periods = segP * (ROUND_SEGMENTS + 1);
    const row: FlatRow = { c, dataS: 0, live: [], runtime: [], engine: [], receive: [], ratios: [], segments: [], publisher: { cpuS: 0, wallS: 0 }, machineCores: [], problems: [], complete: true };
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
      const rr = await liveRun(b, { channels: c, periods, mode: 'flat', schedule: constant, segmentPeriods: segP, recordTimes: false, profile: false, receiver: 'mqtt' });
      row.receive.push(...rates(rr.segments.slice(1), c, segP));
      row.problems.push(...rr.problems.map((p) => `receive only: ${p}`));
      const local = { engine: [] as number[], runtime: [] as number[] };
      for (const level of round % 2 ? (['runtime', 'engine'] as const) : (['engine', 'runtime'] as const)) {
        local[level] = rates(localRun(level, c, periods, segP, pool, fft, SETTINGS).slice(1), c, segP);
        row[level].push(...local[level]);
      }
      row.ratios.push(median(live) / median(local.engine));
    }
    flats.push(row);
    printFlat(row);
  }

  // Where the live agent's CPU goes: what receiving alone costs, then the V8 sampling
  // profiler on one more flat run.
  const big = flats[flats.length - 1];
  printReceive(big);
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
    printProfile(prof.profile, uLive);
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
  else {
    for (const x of PACED_STEPS) if (!(await paced(round4(x * base)))) break;
    let c = round4((PACED_STEPS[0] * base) / 2);
    for (let n = 0; (largestKept as number | null) === null && n < DOWN_STEPS && !tried.has(c); n++, c = round4(c / 2)) await paced(c);
  }
  if (PACED_CHANNELS.length === 0 && largestKept !== null && smallestFailed !== null) {
    const mid = round4((largestKept + smallestFailed) / 2);
    if (!tried.has(mid)) await paced(mid);
  }

  const latencies = await alarmLatency(b, LATENCY_CHANNELS, RAISES);
  return { big, largestKept: largestKept as number | null, smallestFailed: smallestFailed as number | null, latencies };
}

await main();
