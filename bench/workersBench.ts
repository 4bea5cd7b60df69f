/**
 * Worker threads against the agent's own thread, on the same data in one run (issue 11's
 * "every core": at least 1.7x one core's throughput on a 2-core machine, and the same records).
 *
 * No broker: the bench drives the runtimes' host the agent uses (src/agent/workers/) directly,
 * as the agent does: each message handed to `host.message` with its wall-clock stamp, results
 * taken back through the sink, flow control obeyed (`saturated` / `whenReady`). Data: A assets
 * of C sensors each, 25.6 kHz float32 in 0.1 s binary blocks (the live bench's stream,
 * benchStream.ts, 8192-point frames, 50 % overlap, 4 averages), speed records 10 a second
 * stepping in and out of a band so every asset raises and clears. Every message is built
 * before the run, as a view into one large buffer (as mqtt.js hands payloads over).
 *
 * Modes, in alternating rounds (the machine is shared and its load drifts): the agent's thread
 * (`--workers 0`), 1 worker, 2 workers (or `--workers 0,1,2,4`). Each mode of each round runs in
 * a fresh process (every mode starts cold, as the agent does: no mode inherits another's
 * compiled code or garbage), builds its host, feeds the first `--warmup` seconds of data
 * untimed (start-up and JIT warm-up), then times the rest to the last result. Each round is
 * framed by the machine's own two-thread speed-up (a busy loop on two threads against one):
 * on a shared machine another process may hold a core, and then no worker count can double.
 * Each round also runs the same work split over the largest worker count's threads with
 * nothing between them (workersCeiling.ts: each thread its own assets, fed by itself, in a
 * fresh process): what the machine gives this work on that many threads, the pool's ceiling.
 * Reported: channels of data per wall second (channel-
 * seconds of data / wall s: how many channels the host keeps up with in real time), the ratio
 * to the agent's thread in the same round, CPU of the whole process per channel-second, and
 * the main thread's own CPU (Linux /proc): its cost per routed message gives the ceiling the
 * main thread sets however many cores there are; and where the CPU goes, split between the main
 * thread, the threads the host started (its workers) and the threads that were there before them
 * (V8's compiler and garbage-collector helpers, libuv's pool: every isolate's concurrent marking,
 * sweeping and optimizing compiles run there). Every mode's outbound messages
 * are compared byte for byte, per topic, with the agent's thread's.
 *
 * Messages are taken `--read` at a time per turn of the event loop, as mqtt.js takes the packets
 * of one socket read (the pool posts what one turn routed as one batch).
 *
 * Run: npm run bench:workers [-- --assets 4 --channels 24 --seconds 60 --warmup 15 --rounds 3 --workers 0,1,2 --read 8]
 */
import { execFile } from 'node:child_process';
import { createHash } from 'node:crypto';
import { readdirSync, readFileSync } from 'node:fs';
import { availableParallelism } from 'node:os';
import { performance } from 'node:perf_hooks';
import { fileURLToPath } from 'node:url';
import { parentPort } from 'node:worker_threads';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { SiteMap } from '../src/config/types.ts';
import type { LogSink } from '../src/agent/transientStore.ts';
import { createRuntimeHost } from '../src/agent/workers/workerCount.ts';
import type { HostResult, RuntimeHost } from '../src/agent/workers/runtimeHost.ts';
import { benchArgs } from './benchArgs.ts';
import { machineSpeedup, splitRun, type PartSpan } from './workersCeiling.ts';
import { BLOCK_S, IN_BAND_RPM, ORDERS, SHAFT_HZ, blockPool, poolIndex, scheduleRpm, sensorId, speedPayload, stampBlock, type SpeedSchedule } from './benchStream.ts';

const USAGE = `Usage: npm run bench:workers [-- options]

The agent's runtimes on its own thread and on worker threads, without a broker: channels of
data per wall second and CPU per channel-second in each mode, in alternating rounds, each mode
in a fresh process; the records of every mode must be identical (the bench stops if not). Each
round also splits the same work over as many threads as the largest mode's workers with nothing
between them (each thread its own assets, fed by itself): the most this machine gives this work
on that many threads, which the pool is read against. Takes about two minutes with the defaults.

Options:
  --assets <n>        assets (default 4)
  --channels <n>      channels per asset, 25.6 kHz each (default 24)
  --seconds <s>       data per run (default 60)
  --warmup <s>        data at the start left out of the timing (default 15)
  --rounds <n>        rounds of every mode (default 3)
  --workers <list>    modes: 0 is the agent's thread, n is n workers (default 0,1,2)
  --read <n>          messages per turn of the event loop, as from one socket read (default 8)
  -h, --help          this text

Example: npm run bench:workers -- --workers 0,2 --rounds 5
`;

const values = benchArgs(
  {
    assets: { type: 'string', default: '4' },
    channels: { type: 'string', default: '24' },
    seconds: { type: 'string', default: '60' },
    warmup: { type: 'string', default: '15' },
    rounds: { type: 'string', default: '3' },
    workers: { type: 'string', default: '0,1,2' },
    read: { type: 'string', default: '8' },
    // Internal: one mode of one round, run by the bench itself in a fresh process.
    child: { type: 'string' },
    t0: { type: 'string' },
    // Internal: the work split over N threads with nothing between them (workersCeiling.ts), and one part of it.
    split: { type: 'string' },
    part: { type: 'string' },
    of: { type: 'string' },
  },
  USAGE,
);
const ASSETS = Number(values.assets);
const CHANNELS = Number(values.channels);
const DATA_S = Number(values.seconds);
const WARMUP_S = Number(values.warmup);
const ROUNDS = Number(values.rounds);
const MODES = values.workers.split(',').map(Number);
/** Messages taken per turn of the event loop, as from one socket read (8 blocks: about 80 kB). */
const PER_READ = Number(values.read);
const PREFIX = 'qbw';
const SCHEDULE: SpeedSchedule = { kind: 'cycles', leadS: 2, inS: 5, outS: 4, cycles: 10 };

function mapText(): string {
  const orders = ORDERS.map((m, i) => `      - { id: o${i}, multiple: ${m} }`).join('\n');
  const asset = (a: number) => `
  - id: pump-${a}
    procedure: "Bench only: synthetic data"
    speed: { source: topic, topic: ${PREFIX}/pump-${a}/speed, range_rpm: [600, 1800], max_age_s: 2 }
    orders:
${orders}
    sensors:
${Array.from({ length: CHANNELS }, (_, c) => `      - { id: ${sensorId(c)}, channel: ${c}, units: g }`).join('\n')}
    components:
      - { id: frame-mode, fn_hz: ${SHAFT_HZ}, q: 10, orders: [o0] }
    alarm: { on_delay_s: 2, off_delay_s: 1, deadband_pct: 1, priority: high }
    analysis: { frame_size: 8192, overlap: 0.5, averages: 4, decimation: 1 }`;
  return `site: qbench-workers\nbroker: { url: "mqtt://127.0.0.1:1", topic_prefix: ${PREFIX} }\nagent: { state_every_s: 1, stale_after_s: 5 }\nassets:${Array.from({ length: ASSETS }, (_, a) => asset(a)).join('')}\n`;
}

interface Message {
  asset: string;
  topic: string;
  payload: Uint8Array;
  nowMs: number;
  /** Data time of the message, s after the start: the timed part begins at WARMUP_S. */
  relS: number;
}

/** Every message of the run (of the assets `keep` takes), period by period: each asset's speed record, then its blocks. */
function buildMessages(t0S: number, keep: (asset: number) => boolean = () => true): Message[] {
  const pool = blockPool();
  const periods = Math.round(DATA_S / BLOCK_S);
  const blockBytes = pool[0].byteLength;
  const kept = Array.from({ length: ASSETS }, (_, a) => a).filter(keep);
  const backing = new Uint8Array(periods * kept.length * CHANNELS * blockBytes);
  const out: Message[] = [];
  let at = 0;
  for (let k = 0; k < periods; k++) {
    const startS = t0S + k * BLOCK_S;
    const nowMs = Math.round((startS + BLOCK_S) * 1000) + 40;
    for (const a of kept) {
      const asset = `pump-${a}`;
      out.push({ asset, topic: `${PREFIX}/${asset}/speed`, payload: Buffer.from(speedPayload(startS + BLOCK_S, k * BLOCK_S < SCHEDULE_END_S ? scheduleRpm(SCHEDULE, k * BLOCK_S) : IN_BAND_RPM)), nowMs, relS: k * BLOCK_S });
      for (let c = 0; c < CHANNELS; c++) {
        const view = backing.subarray(at, at + blockBytes);
        view.set(pool[poolIndex(k + 7 * a, c)]);
        stampBlock(view, k, startS);
        at += blockBytes;
        out.push({ asset, topic: `${PREFIX}/${asset}/samples/${sensorId(c)}`, payload: view, nowMs, relS: k * BLOCK_S });
      }
    }
  }
  return out;
}
const SCHEDULE_END_S = SCHEDULE.kind === 'cycles' ? SCHEDULE.leadS + SCHEDULE.cycles * (SCHEDULE.inS + SCHEDULE.outS) : Infinity;

interface RoundResult {
  wallS: number;
  /** The timed part's start and end (ms, absolute: comparable across threads). */
  startMs: number;
  endMs: number;
  cpuS: number;
  /** CPU time of the main thread alone (Linux /proc; NaN elsewhere). */
  mainCpuS: number;
  /** CPU time of the threads the host started, its workers (Linux /proc; NaN elsewhere). */
  workerCpuS: number;
  messages: number;
  /** SHA-256 of every outbound payload, topic by topic in order. */
  digest: string;
  raises: number;
  clears: number;
  topics: number;
}

/**
 * CPU seconds of every thread of this process now, by thread id (its task's utime + stime in
 * /proc, in clock ticks of 10 ms: the timed part lasts seconds; empty off Linux). Wall-clock
 * measures such as event-loop utilisation would count the time a thread waits for a core on a
 * busy machine.
 */
function threadCpuS(): Map<string, number> {
  const out = new Map<string, number>();
  let tids: string[] = [];
  try {
    tids = readdirSync('/proc/self/task');
  } catch {
    return out;
  }
  for (const tid of tids) {
    try {
      const fields = readFileSync(`/proc/self/task/${tid}/stat`, 'utf8').split(') ')[1].split(' ');
      out.set(tid, (Number(fields[11]) + Number(fields[12])) / 100);
    } catch {
      // the thread ended between the listing and the read
    }
  }
  return out;
}

const silent: LogSink = { info: () => undefined, warn: () => undefined, error: () => undefined };

async function round(workers: number, map: SiteMap, text: string, messages: Message[]): Promise<RoundResult> {
  const byTopic = new Map<string, string[]>();
  const take = (r: HostResult) => {
    for (const o of r.out) {
      const list = byTopic.get(o.topic);
      if (list) list.push(o.payload);
      else byTopic.set(o.topic, [o.payload]);
    }
  };
  const before = new Set(threadCpuS().keys());
  const host: RuntimeHost = createRuntimeHost(workers, { result: take, load: () => undefined, log: () => undefined }, silent);
  await host.add(map.assets.map((asset) => ({ asset, agent: map.agent, prefix: PREFIX, mapText: text, stateDir: null })));
  const feed = async (from: number, to: number) => {
    for (let i = from; i < to; i++) {
      const m = messages[i];
      host.message(m.asset, m.topic, m.payload, m.nowMs);
      if (host.saturated) await new Promise<void>((resume) => host.whenReady(resume));
      else if ((i + 1) % PER_READ === 0) await new Promise<void>((next) => setImmediate(next));
    }
    await host.snapshots(); // a barrier: every result before it is in
  };
  const split = messages.findIndex((m) => m.relS >= WARMUP_S);
  await feed(0, split);
  // The threads the host started (its workers), told from the main thread and the ones that were
  // there before it (V8's compiler and garbage-collector helpers, libuv's pool).
  const started = [...threadCpuS().keys()].filter((tid) => !before.has(tid));
  const threads0 = threadCpuS();
  const cpu0 = process.cpuUsage();
  const t0 = performance.now();
  await feed(split, messages.length);
  const t1 = performance.now();
  const wallS = (t1 - t0) / 1000;
  const cpu = process.cpuUsage(cpu0);
  const threads1 = threadCpuS();
  const spent = (tid: string) => (threads1.get(tid) ?? threads0.get(tid) ?? 0) - (threads0.get(tid) ?? 0);
  const mainS = threads1.size > 0 ? spent(String(process.pid)) : NaN;
  const workerS = threads1.size > 0 ? started.reduce((sum, tid) => sum + spent(tid), 0) : NaN;
  await host.stop();
  const hash = createHash('sha256');
  let raises = 0;
  let clears = 0;
  for (const topic of [...byTopic.keys()].sort()) {
    hash.update(topic).update('\0');
    for (const p of byTopic.get(topic) as string[]) {
      hash.update(p).update('\0');
      if (topic.endsWith('/alarm')) {
        const event = (JSON.parse(p) as { event: string }).event;
        if (event === 'raise') raises++;
        if (event === 'clear') clears++;
      }
    }
  }
  return { wallS, startMs: performance.timeOrigin + t0, endMs: performance.timeOrigin + t1, cpuS: (cpu.user + cpu.system) / 1e6, mainCpuS: mainS, workerCpuS: workerS, messages: messages.length - split, digest: hash.digest('hex'), raises, clears, topics: byTopic.size };
}

/** This bench again in a fresh process with `args` (and the data options); its last line of output. */
function inChild(args: string[], t0S: number, what: string): Promise<string> {
  const argv = [...process.execArgv, fileURLToPath(import.meta.url), ...args, ...dataArgs(t0S)];
  return new Promise((resolve, reject) => {
    execFile(process.execPath, argv, { maxBuffer: 1 << 20 }, (err, stdout, stderr) => {
      if (err) return reject(new Error(`${what} failed: ${stderr || err.message}`));
      resolve(stdout.trim().split('\n').at(-1) as string);
    });
  });
}

/**
 * One mode of one round in a fresh process, so every mode starts cold (compiled code, heap) as
 * the agent does, and none inherits another's warm JIT or garbage.
 */
async function roundInChild(workers: number, t0S: number): Promise<RoundResult> {
  return JSON.parse(await inChild(['--child', String(workers)], t0S, `the ${workers}-worker round`)) as RoundResult;
}

const median = (xs: number[]) => [...xs].sort((p, q) => p - q)[Math.floor(xs.length / 2)];

function benchMap(): { map: SiteMap; text: string } {
  const text = mapText();
  const { map, problems } = parseAssetMap(text, 'workers-bench.yaml');
  if (!map) throw new Error(problems.map((p) => p.message).join('\n'));
  return { map, text };
}

async function child(workers: number, t0S: number): Promise<void> {
  const { map, text } = benchMap();
  console.log(JSON.stringify(await round(workers, map, text, buildMessages(t0S))));
}

/** The data options, as this process was given them, for the processes and threads it starts. */
function dataArgs(t0S: number): string[] {
  const args = ['--t0', String(t0S)];
  for (const k of ['assets', 'channels', 'seconds', 'warmup', 'read'] as const) args.push(`--${k}`, String(values[k]));
  return args;
}

/** Part i of `of` (a thread of the split run): assets a with a mod `of` = i, on the agent's thread's host, fed here. */
async function part(i: number, of: number, t0S: number): Promise<void> {
  const { map, text } = benchMap();
  const keep = (a: number) => a % of === i;
  const r = await round(0, { ...map, assets: map.assets.filter((_, a) => keep(a)) }, text, buildMessages(t0S, keep));
  parentPort?.postMessage({ startMs: r.startMs, endMs: r.endMs } satisfies PartSpan);
}

/** The work split over `threads` threads with nothing between them, in a fresh process: its wall time. */
async function splitInChild(threads: number, t0S: number): Promise<number> {
  return Number(await inChild(['--split', String(threads)], t0S, 'the split run'));
}

async function main(): Promise<void> {
  const t0S = Math.floor(Date.now() / 1000) - 3600;
  // Per period: each asset's speed record and its blocks.
  const messageCount = Math.round(DATA_S / BLOCK_S) * ASSETS * (CHANNELS + 1);
  const timedS = DATA_S - WARMUP_S;
  const channelSeconds = ASSETS * CHANNELS * timedS;
  console.log(`workers bench: ${ASSETS} assets x ${CHANNELS} channels of 25.6 kHz, ${DATA_S} s of data (${WARMUP_S} s warm-up untimed), ${messageCount} messages; ${availableParallelism()} cores; modes ${MODES.map((w) => (w === 0 ? 'thread' : `${w} worker${w > 1 ? 's' : ''}`)).join(', ')}; ${ROUNDS} rounds`);
  const rates = new Map<number, number[]>(MODES.map((w) => [w, []]));
  const ratios = new Map<number, number[]>(MODES.map((w) => [w, []]));
  const cpuPer = new Map<number, number[]>(MODES.map((w) => [w, []]));
  /** CPU of the mode over the thread's in the same round: the workers' cost, less sensitive to the machine's load than wall time. */
  const cpuRatio = new Map<number, number[]>(MODES.map((w) => [w, []]));
  const routeUs = new Map<number, number[]>(MODES.map((w) => [w, []]));
  /** Where the CPU goes, ms per channel-second: the main thread, the workers, the threads that were there before them. */
  const split = new Map<number, Array<[number, number, number]>>(MODES.map((w) => [w, []]));
  const machine: number[] = [];
  /** The work split over SPLIT threads with nothing between them, against the agent's thread in the same round. */
  const SPLIT = Math.max(...MODES);
  const ideal: number[] = [];
  let reference: RoundResult | null = null;
  for (let r = 0; r < ROUNDS; r++) {
    const order = r % 2 === 0 ? MODES : [...MODES].reverse();
    const thisRound = new Map<number, RoundResult>();
    const before = await machineSpeedup();
    for (const w of order) {
      const res = await roundInChild(w, t0S);
      thisRound.set(w, res);
      reference ??= res;
      if (res.digest !== reference.digest) throw new Error(`records differ with ${w} workers (round ${r + 1}): digest ${res.digest} against ${reference.digest}`);
    }
    const base = thisRound.get(0) ?? thisRound.get(MODES[0]);
    const line: string[] = [];
    for (const w of MODES) {
      const res = thisRound.get(w) as RoundResult;
      const rate = channelSeconds / res.wallS;
      rates.get(w)?.push(rate);
      ratios.get(w)?.push(base ? base.wallS / res.wallS : 1);
      cpuPer.get(w)?.push((res.cpuS / channelSeconds) * 1e3);
      cpuRatio.get(w)?.push(base ? res.cpuS / base.cpuS : 1);
      routeUs.get(w)?.push((res.mainCpuS / res.messages) * 1e6);
      const ms = (cpuS: number) => (cpuS / channelSeconds) * 1e3;
      split.get(w)?.push([ms(res.mainCpuS), ms(res.workerCpuS), ms(res.cpuS - res.mainCpuS - res.workerCpuS)]);
      line.push(`${w === 0 ? 'thread' : `${w}w`} ${rate.toFixed(0)} ch (x${(base ? base.wallS / res.wallS : 1).toFixed(2)}, main thread ${((res.mainCpuS / res.cpuS) * 100).toFixed(0)} % of the CPU)`);
    }
    if (SPLIT >= 2 && base) {
      ideal.push(base.wallS / (await splitInChild(SPLIT, t0S)));
      line.push(`the work split over ${SPLIT} threads with nothing between them x${(ideal.at(-1) as number).toFixed(2)}`);
    }
    const after = await machineSpeedup();
    machine.push(before, after);
    console.log(`round ${r + 1}: ${line.join('; ')}; the machine's two-thread speed-up ${before.toFixed(2)} before, ${after.toFixed(2)} after`);
  }
  console.log(`records: identical in every mode and round (SHA-256 ${reference?.digest.slice(0, 16)}..., ${reference?.raises} raises, ${reference?.clears} clears, ${reference?.topics} topics)`);
  console.log('\nmode        channels/wall s (median)  vs thread (median, min..max)  CPU ms per channel-s (vs thread)  main thread CPU us per message');
  for (const w of MODES) {
    const rs = ratios.get(w) as number[];
    console.log(
      `${(w === 0 ? 'thread' : `${w} worker${w > 1 ? 's' : ''}`).padEnd(12)}${median(rates.get(w) as number[]).toFixed(0).padStart(10)}                ${`x${median(rs).toFixed(2)} (${Math.min(...rs).toFixed(2)}..${Math.max(...rs).toFixed(2)})`.padEnd(30)}${median(cpuPer.get(w) as number[]).toFixed(3).padStart(8)} (x${median(cpuRatio.get(w) as number[]).toFixed(2)})         ${median(routeUs.get(w) as number[]).toFixed(1).padStart(6)}`,
    );
  }
  console.log('\nwhere the CPU goes, ms per channel-s (median of rounds; Linux /proc, 10 ms ticks): main thread / worker threads / other threads (V8\'s compiler and garbage-collector helpers, libuv)');
  for (const w of MODES) {
    const parts = split.get(w) as Array<[number, number, number]>;
    const m = [0, 1, 2].map((k) => median(parts.map((p) => p[k])).toFixed(3));
    console.log(`${(w === 0 ? 'thread' : `${w} worker${w > 1 ? 's' : ''}`).padEnd(12)}${m.join(' / ')}`);
  }
  console.log(`the machine's own two-thread speed-up (a busy loop on two threads against one; 2.00 on two free cores): median ${median(machine).toFixed(2)}, ${Math.min(...machine).toFixed(2)}..${Math.max(...machine).toFixed(2)}`);
  if (ideal.length > 0) {
    const pool = ratios.get(SPLIT) as number[];
    const share = pool.map((x, k) => x / ideal[k]);
    console.log(
      `the work split over ${SPLIT} threads with nothing between them (each thread its own assets, fed by itself: no agent's thread, no routing), in a fresh process, against the agent's thread: ` +
        `median x${median(ideal).toFixed(2)}, ${Math.min(...ideal).toFixed(2)}..${Math.max(...ideal).toFixed(2)}: what this machine gives this work on ${SPLIT} threads, the pool's ceiling here; ` +
        `${SPLIT} workers reached ${(100 * median(share)).toFixed(0)} % of it (median of rounds)`,
    );
  }
  const pooled = MODES.filter((w) => w > 0);
  if (pooled.length > 0) {
    const us = median(pooled.flatMap((w) => routeUs.get(w) as number[]));
    const perChannelS = 1 / BLOCK_S + 1 / CHANNELS; // blocks, and the asset's speed records shared by its channels
    const ceiling = 1e6 / (us * perChannelS);
    console.log(`\nmain thread with workers: about ${us.toFixed(1)} us of CPU per message (routing, copying the bytes, posting, taking results back, and this bench's own loop), so one main thread routes at most about ${ceiling.toFixed(0)} channels in real time (before MQTT parsing and socket work, which the live agent adds on that thread)`);
  }
}

if (values.part !== undefined) await part(Number(values.part), Number(values.of), Number(values.t0));
else if (values.split !== undefined) console.log(await splitRun(fileURLToPath(import.meta.url), dataArgs(Number(values.t0)), Number(values.split)));
else if (values.child !== undefined) await child(Number(values.child), Number(values.t0));
else await main();
