/**
 * Soak run: `qband run` as a child process fed many 25.6 kHz channels in real time through a
 * real broker, for minutes, while its resident memory is sampled from /proc. Loopback only,
 * bounded in time. Reports the memory over time, the agent's counters (what was dropped and
 * why) and whether memory stayed flat.
 *
 *   npm run soak -- --channels 32 --seconds 180 [--broker mqtt://127.0.0.1:1883]
 *
 * Without --broker an aedes broker is started in-process (MQTT 3.1.1). The test suite runs a
 * short version of the same (test/soak.test.ts).
 */
import { spawn } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { join } from 'node:path';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { Aedes } from 'aedes';
import mqtt from 'mqtt';
import { encodeSampleBlockBinary } from '../src/acquisition/samplePayload.ts';
import { soakMap } from './soakMap.ts';
import { benchArgs } from './benchArgs.ts';

export interface SoakOptions {
  channels: number;
  seconds: number;
  brokerUrl?: string;
  sampleRateHz?: number;
  blockS?: number;
  /** Resident-memory samples are taken this often (s). */
  sampleEveryS?: number;
  /** `qband run --workers` (absent: its default, auto). */
  workers?: string;
  /** The qband command to run (absent: this checkout's bin/qband.mjs), so two builds can be compared in one run. */
  bin?: string;
  /**
   * Ask the agent for a full collection at the run's middle and at its last block and compare
   * what it keeps alive (retainedGrowth). The first shrinks V8's heap, so the resident memory
   * after the middle reads lower than it would: off for the figures quoted per channel.
   */
  keptAlive?: boolean;
  log?: (line: string) => void;
}

export interface SoakResult {
  channels: number;
  seconds: number;
  broker: string;
  blocksPublished: number;
  rssMiB: Array<{ atS: number; rssMiB: number }>;
  /**
   * Resident memory at the end over the highest sample from the warm-up mark (10 s, or a third
   * of a longer run) to the run's middle: what the second half added. V8's young generation
   * reaches its working size (a one-time step of 10 to 16 MiB) anywhere in the first 15 s or so,
   * later on a loaded machine; taken against one sample at the mark, that step read as growth.
   * A leak keeps growing through the second half.
   */
  rssGrowth: number;
  /**
   * With keptAlive: what the agent keeps alive after full collections (bench/soakMemory.mjs: old
   * generation, large objects, code and array buffers, summed over its thread and the workers')
   * at the last block over the same at the run's middle, both asked for by the soak under load.
   * Garbage does not count here, so a leak far smaller than the resident memory's swings shows.
   * Null without keptAlive, or if the agent's thread did not answer both.
   */
  retainedGrowth: number | null;
  /** Every retained line (MiB, seconds from the first block; `asked`: the soak's own collections; `thread`: 0 the agent's, else a worker's). */
  retainedMiB: Array<{ atS: number; retainedMiB: number; asked: boolean; thread: number }>;
  /** The process's base: resident memory once online with the map loaded, before any block (after 2 s idle). */
  baseRssMiB: number;
  /** The agent's own view (MiB, bench/soakMemory.mjs) at the base and at each resident-memory sample. */
  baseMemory: AgentMemory | null;
  memory: Array<{ atS: number } & AgentMemory>;
  counters: Record<string, number>;
  agentExit: number | null;
}

/** process.memoryUsage() in the agent and V8's young and old generations, MiB. */
export interface AgentMemory {
  rss: number;
  heapTotal: number;
  heapUsed: number;
  external: number;
  arrayBuffers: number;
  newSpace: number;
  oldSpace: number;
}

const BIN = new URL('../bin/qband.mjs', import.meta.url).pathname;
const MEMORY_HOOK = new URL('./soakMemory.mjs', import.meta.url).pathname;

/** One line of the agent's memory file (soakMemory.mjs), bytes: a periodic one, or one with `retained`. */
type MemoryLine = { t: number; thread: number; retained?: number; asked?: boolean } & Partial<Record<keyof AgentMemory, number>>;

/** Every whole line of the agent's memory file; none if there is no file yet. */
function memoryLines(file: string): MemoryLine[] {
  let text = '';
  try {
    text = readFileSync(file, 'utf8');
  } catch {
    return [];
  }
  return text
    .split('\n')
    .filter((l) => l.endsWith('}')) // a line cut short by the agent's exit (or still being written) is left out
    .map((l) => JSON.parse(l) as MemoryLine);
}

/** Every `retained` line, in MiB, seconds from `startMs`. */
function retainedLines(file: string, startMs: number): SoakResult['retainedMiB'] {
  return memoryLines(file)
    .filter((m) => m.retained !== undefined)
    .map((m) => ({ atS: Math.round((m.t - startMs) / 100) / 10, retainedMiB: Math.round(((m.retained as number) / 1048576) * 100) / 100, asked: m.asked === true, thread: m.thread }));
}

/**
 * The last asked-for retained figure over the first, summed over the threads that answered both
 * (the middle's and the last block's); null unless the agent's own thread did.
 */
function keptAliveGrowth(retained: SoakResult['retainedMiB']): number | null {
  const byThread = new Map<number, number[]>();
  for (const r of retained) if (r.asked) byThread.set(r.thread, [...(byThread.get(r.thread) ?? []), r.retainedMiB]);
  if ((byThread.get(0) ?? []).length < 2) return null;
  let first = 0;
  let last = 0;
  for (const v of byThread.values()) {
    if (v.length < 2) continue;
    first += v[0];
    last += v.at(-1)!;
  }
  return last / first;
}

/** The agent's thread's last periodic memory line (written once a second by the preloaded hook), in MiB. */
function agentMemory(file: string): AgentMemory | null {
  const m = memoryLines(file)
    .filter((l) => l.thread === 0 && l.retained === undefined)
    .at(-1);
  if (!m) return null;
  const mib = (b: number | undefined): number => Math.round(((b ?? 0) / 1048576) * 10) / 10;
  return { rss: mib(m.rss), heapTotal: mib(m.heapTotal), heapUsed: mib(m.heapUsed), external: mib(m.external), arrayBuffers: mib(m.arrayBuffers), newSpace: mib(m.newSpace), oldSpace: mib(m.oldSpace) };
}

function rssMiB(pid: number): number {
  const status = readFileSync(`/proc/${pid}/status`, 'utf8');
  const kb = Number(/VmRSS:\s+(\d+)/.exec(status)?.[1] ?? NaN);
  return kb / 1024;
}

export async function runSoak(opts: SoakOptions): Promise<SoakResult> {
  const log = opts.log ?? (() => undefined);
  const fs = opts.sampleRateHz ?? 25_600;
  const blockS = opts.blockS ?? 0.1;
  const n = Math.round(fs * blockS);
  let brokerUrl = opts.brokerUrl;
  let closeBroker = async () => undefined as unknown;
  let version = 5;
  if (!brokerUrl) {
    const aedes = await Aedes.createBroker();
    const server = createServer(aedes.handle);
    await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
    brokerUrl = `mqtt://127.0.0.1:${(server.address() as { port: number }).port}`;
    version = 4;
    closeBroker = () => new Promise((r) => server.close(() => (aedes.close(), r(undefined))));
  }
  const prefix = `qsoak-${process.pid}`;
  const dir = mkdtempSync(join(tmpdir(), 'qband-soak-'));
  const mapPath = join(dir, 'map.yaml');
  writeFileSync(mapPath, soakMap(prefix, brokerUrl, opts.channels));
  const workers = opts.workers === undefined ? [] : ['--workers', String(opts.workers)];
  const memoryFile = join(dir, 'memory.jsonl');
  const agent = spawn(process.execPath, [...(opts.keptAlive ? ['--expose-gc'] : []), '--import', MEMORY_HOOK, opts.bin ?? BIN, 'run', '--map', mapPath, '--mqtt-version', version === 5 ? '5' : '3.1.1', '--state-dir', join(dir, 'state'), '--log-level', 'warn', ...workers], {
    stdio: ['ignore', 'ignore', 'pipe'],
    env: { ...process.env, QBAND_SOAK_MEMORY_FILE: memoryFile },
  });
  let agentLog = '';
  agent.stderr.on('data', (d) => (agentLog += d));
  const agentExit = new Promise<number | null>((r) => agent.on('exit', (c) => r(c)));

  const client = await mqtt.connectAsync(brokerUrl, { protocolVersion: version as 4 | 5, reconnectPeriod: 0 });
  let lastState: Record<string, unknown> | null = null;
  let online: () => void = () => undefined;
  const isOnline = new Promise<void>((r) => (online = r));
  client.on('message', (topic, payload) => {
    if (payload.length === 0) return;
    const body = JSON.parse(payload.toString());
    if (topic.endsWith('/state')) lastState = body;
    else if (body.state === 'online') online();
  });
  await client.subscribeAsync([`${prefix}/fan-1/state`, `${prefix}/agent/+/status`], { qos: 0 });
  const timer = setTimeout(() => {
    agent.kill('SIGKILL');
    throw new Error(`agent did not come online:\n${agentLog}`);
  }, 15_000);
  await isOnline;
  clearTimeout(timer);
  await new Promise((r) => setTimeout(r, 2000));
  const baseRssMiB = Math.round(rssMiB(agent.pid!) * 10) / 10;
  const baseMemory = agentMemory(memoryFile);
  log(`  base (online, no block yet): agent RSS ${baseRssMiB} MiB${baseMemory ? `; heap ${baseMemory.heapUsed} of ${baseMemory.heapTotal} (young ${baseMemory.newSpace}), arrayBuffers ${baseMemory.arrayBuffers}` : ''}`);
  const memory: SoakResult['memory'] = [];

  // One block of each channel: 1X at 20 Hz (1200 rpm, inside the housing band) plus noise.
  const base = Array.from({ length: opts.channels }, (_, c) =>
    Float32Array.from({ length: n }, (_, i) => 0.05 * Math.sin((2 * Math.PI * 20 * i) / fs + c) + 0.01 * (Math.random() - 0.5)),
  );
  const t0S = Date.now() / 1000 - 1;
  const rss: SoakResult['rssMiB'] = [];
  const startMs = Date.now();
  let published = 0;
  const blocks = Math.floor(opts.seconds / blockS);
  let middleAsked = false;
  let nextSampleS = 0;
  for (let b = 0; b < blocks; b++) {
    // Real-time pace: block b is published once its data time has come.
    const dueMs = startMs + (b + 1) * blockS * 1000;
    const waitMs = dueMs - Date.now();
    if (waitMs > 0) await new Promise((r) => setTimeout(r, waitMs));
    const tS = t0S + b * blockS;
    for (let c = 0; c < opts.channels; c++) {
      client.publish(`${prefix}/fan-1/samples/s${c}`, Buffer.from(encodeSampleBlockBinary({ tS, sampleRateHz: fs, seq: b, samples: base[c] })), { qos: 0 });
      published++;
    }
    client.publish(`${prefix}/fan-1/speed`, JSON.stringify({ t: tS, rpm: 1200 }), { qos: 0 });
    const atS = (Date.now() - startMs) / 1000;
    if (atS >= nextSampleS) {
      rss.push({ atS: Math.round(atS), rssMiB: Math.round(rssMiB(agent.pid!) * 10) / 10 });
      const m = agentMemory(memoryFile);
      if (m) memory.push({ atS: Math.round(atS), ...m });
      log(`  ${Math.round(atS)} s: agent RSS ${rss.at(-1)!.rssMiB} MiB${m ? `; heap ${m.heapUsed} of ${m.heapTotal} (young ${m.newSpace}), arrayBuffers ${m.arrayBuffers}` : ''}`);
      nextSampleS += opts.sampleEveryS ?? 10;
    }
    if (opts.keptAlive && !middleAsked && atS >= opts.seconds / 2) {
      middleAsked = true;
      agent.kill('SIGUSR2'); // a full collection: what the first half keeps (soakMemory.mjs)
    }
  }
  if (opts.keptAlive) agent.kill('SIGUSR2'); // and what the second half keeps, still under load
  // Wait (bounded) for a state that has counted every block: the agent's freshness tick
  // re-publishes the state every stale_after_s of wall time once data stops.
  const settleStart = Date.now();
  while (Date.now() - settleStart < 12_000) {
    const received = (lastState as { counters?: Record<string, number> } | null)?.counters?.blocks_received ?? 0;
    if (received >= published) break;
    await new Promise((r) => setTimeout(r, 200));
  }
  rss.push({ atS: Math.round((Date.now() - startMs) / 1000), rssMiB: Math.round(rssMiB(agent.pid!) * 10) / 10 });
  const counters = ((lastState as { counters?: Record<string, number> } | null)?.counters ?? {}) as Record<string, number>;
  agent.kill('SIGTERM');
  const exit = await agentExit;
  await client.publishAsync(`${prefix}/fan-1/state`, '', { qos: 1, retain: true }).catch(() => undefined);
  await client.endAsync();
  await closeBroker();
  // Warm-up: the heap grows to its working size over the first ten seconds or so (see rssGrowth).
  const warmAtS = Math.max(10, opts.seconds / 3);
  const settled = rss.filter((r) => r.atS >= warmAtS && r.atS <= Math.max(warmAtS, opts.seconds / 2)).map((r) => r.rssMiB);
  const reference = settled.length > 0 ? Math.max(...settled) : rss[0].rssMiB;
  const retained = retainedLines(memoryFile, startMs);
  return {
    channels: opts.channels,
    seconds: opts.seconds,
    broker: brokerUrl,
    blocksPublished: published,
    rssMiB: rss,
    rssGrowth: rss.at(-1)!.rssMiB / reference,
    retainedGrowth: opts.keptAlive ? keptAliveGrowth(retained) : null,
    retainedMiB: retained,
    baseRssMiB,
    baseMemory,
    memory,
    counters,
    agentExit: exit,
  };
}

/** The retained lines as `12.3s=21.7*` (* asked for; a worker's prefixed `w<id>:`), MiB. */
export function keptAliveText(retained: SoakResult['retainedMiB']): string {
  return `${retained.map((r) => `${r.thread === 0 ? '' : `w${r.thread}:`}${r.atS}s=${r.retainedMiB}${r.asked ? '*' : ''}`).join(' ')} MiB; * asked for`;
}

/** One line on a run: its base, after warm-up, peak and end, each also per channel above the base. */
function summary(label: string, r: SoakResult): string {
  const perChannel = (mib: number): string => ((mib - r.baseRssMiB) / r.channels).toFixed(2);
  const warm = r.rssMiB.find((x) => x.atS >= Math.max(10, r.seconds / 3)) ?? r.rssMiB[0];
  const peak = Math.max(...r.rssMiB.map((x) => x.rssMiB));
  const end = r.rssMiB.at(-1)!.rssMiB;
  const last = r.memory.at(-1);
  const heap = last
    ? `; at the end heap ${last.heapUsed} used of ${last.heapTotal} (young generation ${last.newSpace}, old ${last.oldSpace}), arrayBuffers ${last.arrayBuffers}, external ${last.external}` +
      (r.baseMemory ? ` (base: heap ${r.baseMemory.heapUsed} of ${r.baseMemory.heapTotal}, young ${r.baseMemory.newSpace}, arrayBuffers ${r.baseMemory.arrayBuffers})` : '')
    : '';
  return (
    `${label}: base ${r.baseRssMiB} MiB (online, map loaded, no block); after warm-up (${warm.atS} s) ${warm.rssMiB} MiB = ${perChannel(warm.rssMiB)} MiB per channel above it, ` +
    `peak ${peak} = ${perChannel(peak)}, end ${end} = ${perChannel(end)}${heap} MiB`
  );
}

const SOAK_USAGE = `Usage: npm run soak [-- options]

\`qband run\` as a child process fed many 25.6 kHz channels in real time through a broker for
minutes, its resident memory sampled from /proc: memory over time and per channel above the
process's base, and what the agent counted (dropped, and why).

Options:
  --channels <n>      channels (default 32)
  --seconds <s>       length of the run (default 180)
  --broker <url>      broker (default: aedes started in this process, MQTT 3.1.1)
  --workers <n|auto>  \`qband run --workers\` (default: its own default)
  --bin <a,b>         qband entry points to compare in alternating rounds (default this checkout's
                      bin/qband.mjs)
  --rounds <n>        rounds (default 1)
  --kept-alive        also ask the agent for a full collection at the middle and at the last
                      block and compare what it keeps alive (a leak shows there, garbage does
                      not); the first collection lowers the resident memory after the middle
  -h, --help          this text

Example: npm run soak -- --channels 64 --seconds 150 --broker mqtt://127.0.0.1:1883
`;

if (import.meta.url === `file://${process.argv[1]}`) {
  const values = benchArgs(
    {
      channels: { type: 'string', default: '32' },
      seconds: { type: 'string', default: '180' },
      broker: { type: 'string' },
      workers: { type: 'string' },
      bin: { type: 'string' },
      rounds: { type: 'string', default: '1' },
      'kept-alive': { type: 'boolean', default: false },
    },
    SOAK_USAGE,
  );
  // --bin a.mjs,b.mjs: two builds of qband measured in alternating rounds of one run.
  const bins = values.bin ? values.bin.split(',') : [BIN];
  const lines: string[] = [];
  for (let round = 1; round <= Number(values.rounds); round++) {
    for (const bin of bins) {
      console.log(`round ${round}, ${bin}`);
      const result = await runSoak({ channels: Number(values.channels), seconds: Number(values.seconds), brokerUrl: values.broker, workers: values.workers, bin, keptAlive: values['kept-alive'], log: (l) => console.log(l) });
      console.log(JSON.stringify({ ...result, rssMiB: undefined, memory: undefined, retainedMiB: undefined }, null, 2));
      console.log(`memory: ${result.rssMiB[0].rssMiB} MiB at start, ${result.rssMiB.at(-1)!.rssMiB} MiB at the end; growth over the second half x${result.rssGrowth.toFixed(3)}${result.retainedGrowth === null ? '' : `; kept alive after full collections x${result.retainedGrowth.toFixed(3)} (${keptAliveText(result.retainedMiB)})`}`);
      lines.push(summary(`round ${round}, ${bin}, ${result.channels} channels, ${result.seconds} s`, result));
      console.log(lines.at(-1));
    }
  }
  console.log(`\n${lines.join('\n')}\n(target at most 1 MiB per channel at 64 channels)`);
}
