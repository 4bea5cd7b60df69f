/**
 * The whole live story in one process: a broker (embedded, unless one is given), the real
 * agent built by Agent.start from the demo map, a simulated machine publishing sample blocks
 * like a gateway, and a view subscribed to what the agent publishes.
 *
 *   machine publisher --samples--> broker --> agent --alarm, state, presence--> broker --> view
 *
 * The view subscribes before the agent starts, so everything it shows was published during
 * this run; retained messages (left on a shared broker by an earlier run) are ignored. The
 * end is clean in this order: machine done, the agent's last decisions seen, agent stopped
 * (offline presence seen), clients closed, embedded broker closed.
 */
import type { IdentifiedRecord } from '../identification/identifiedRecord.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';
import { hostname, tmpdir } from 'node:os';
import { isAbsolute, join, relative } from 'node:path';
import { readFile } from 'node:fs/promises';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { pino } from 'pino';
import type { AlarmMessage, LifecycleMessage, StateMessage } from '../advisory/messages.ts';
import { Agent } from '../agent/agent.ts';
import { createLogger } from '../agent/logger.ts';
import { agentStatusTopic, assetTopics } from '../agent/topics.ts';
import { parseAssetMap } from '../config/parseAssetMap.ts';
import type { AssetConfig } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import type { RunInfo } from './demoText.ts';
import { DemoView, type ViewMode } from './demoView.ts';
import { startEmbeddedBroker, type EmbeddedBroker } from './embeddedBroker.ts';
import { publishMachine, type MachineSource, type PublishCounts } from './machinePublisher.ts';
import type { HttpAddress } from '../page/httpAddress.ts';
import { startPageServer, type PageServer } from '../page/pageServer.ts';

export interface DemoOptions {
  mapPath: string;
  source: MachineSource;
  /** Data seconds per wall second. */
  speed: number;
  /** An existing broker; without it an embedded one is started on a free loopback port. */
  brokerUrl?: string;
  /** Protocol for brokerUrl (default 5); the embedded broker always gets 4 (3.1.1). */
  protocolVersion?: 4 | 5;
  /** Credentials / TLS for brokerUrl, used by all three clients. */
  connectOptions?: Partial<IClientOptions>;
  /** Sample-block payload form (default binary). */
  blockFormat?: 'binary' | 'json';
  out: { write(chunk: string): unknown };
  view: ViewMode;
  columns?: number;
  /** Where the agent's log goes (default a new file in the OS temp folder). */
  logPath?: string;
  /** Ends the run early (Ctrl-C); the stop is as clean as at the end of the run. */
  signal?: AbortSignal;
  clientId?: string;
  /** Working directory, to show paths relative to it. */
  cwd?: string;
  /** Serve the operator page (and /metrics) here while the run lasts; null: no page. */
  http?: { address: HttpAddress; token: string | null } | null;
}

export interface DemoResult {
  run: RunInfo | null;
  alarms: AlarmMessage[];
  lifecycle: LifecycleMessage[];
  /** Presence states of the agent as the view saw them, in order. */
  presence: string[];
  lastState: StateMessage | null;
  published: PublishCounts | null;
  brokerUrl: string;
  embedded: boolean;
  logPath: string;
  /** The operator page's address, when one was served. */
  pageUrl: string | null;
}

/** How long the demo's clients wait for the broker before giving up (ms). */
const CONNECT_TIMEOUT_MS = 10_000;
/** After the last block: wait for a state this close (s of data) to the run's end... */
const CATCH_UP_S = 1.5;
/** ...for at most this long (ms). */
const CATCH_UP_TIMEOUT_MS = 5_000;
/** How long to wait for the agent's offline presence to come round (ms). */
const OFFLINE_TIMEOUT_MS = 3_000;

export async function runDemo(opts: DemoOptions): Promise<DemoResult> {
  const { asset, site, prefix } = await loadDemoAsset(opts.mapPath);
  const logPath = opts.logPath ?? join(tmpdir(), `qband-demo-${new Date().toISOString().replace(/[:.]/g, '-')}.log`);
  const view = new DemoView({ out: opts.out, mode: opts.view, columns: opts.columns });
  const clientId = opts.clientId ?? `qband-demo-${hostname()}`.replace(/[^A-Za-z0-9._-]/g, '-').slice(0, 48);
  const topics = assetTopics(asset, prefix);
  const statusTopic = agentStatusTopic(prefix, clientId);

  const result: DemoResult = { run: null, alarms: [], lifecycle: [], presence: [], lastState: null, published: null, brokerUrl: opts.brokerUrl ?? '', embedded: !opts.brokerUrl, logPath, pageUrl: null };
  let broker: EmbeddedBroker | null = null;
  let agent: Agent | null = null;
  let page: PageServer | null = null;
  const clients: MqttClient[] = [];
  const logFile = pino.destination({ dest: logPath, sync: true, mkdir: true });
  let finished = false;
  try {
    if (!opts.brokerUrl) broker = await startEmbeddedBroker();
    const url = broker ? broker.url : (opts.brokerUrl as string);
    result.brokerUrl = url;
    const protocolVersion = broker ? broker.protocolVersion : (opts.protocolVersion ?? 5);
    const connectOptions = broker ? {} : (opts.connectOptions ?? {});

    const watcher = await connectClient(url, { ...connectOptions, protocolVersion, clientId: `${clientId}-view` });
    clients.push(watcher);
    watcher.on('message', (topic, payload, packet) => {
      if (packet.retain || payload.length === 0) return;
      let message: unknown;
      try {
        message = JSON.parse(payload.toString('utf8'));
      } catch {
        view.note(`(a message on ${topic} is not JSON; ignored)`);
        return;
      }
      view.onRaw(topic, message);
      if (topic === topics.state) {
        result.lastState = message as StateMessage;
        view.onState(result.lastState);
      } else if (topic === topics.alarm) {
        const m = message as AlarmMessage | LifecycleMessage;
        if (m.event === 'raise' || m.event === 'escalate' || m.event === 'clear') result.alarms.push(m as AlarmMessage);
        else result.lifecycle.push(m as LifecycleMessage);
        view.onAlarm(m);
      } else if (topic === topics.transient || topic === topics.identified) {
        view.onLearning(message as TransientRecord | IdentifiedRecord);
      } else if (topic === statusTopic) {
        const state = String((message as { state?: unknown }).state);
        result.presence.push(state);
        view.onPresence(state);
      }
    });
    await watcher.subscribeAsync([topics.state, topics.alarm, topics.transient, topics.identified, statusTopic], { qos: 1 });

    const logger = createLogger({
      level: 'info',
      destination: pino.multistream([
        { level: 'info', stream: logFile },
        { level: 'warn', stream: { write: (line: string) => view.note(agentLogNote(line)) } },
      ]),
    });
    // The agent as `qband run` builds it, worker threads included (auto: one per core, at most one per asset).
    agent = await Agent.start({ mapPath: opts.mapPath, brokerUrl: url, protocolVersion, clientId, watchMap: false, connectOptions, workers: 'auto' }, { logger });
    await withTimeout(agent.ready(), CONNECT_TIMEOUT_MS, `the agent did not get through to the broker at ${url} within ${CONNECT_TIMEOUT_MS / 1000} s`);

    if (opts.http) {
      page = await startPageServer(agent, opts.http.address, { logger, token: opts.http.token });
      result.pageUrl = page.url;
    }

    const gateway = await connectClient(url, { ...connectOptions, protocolVersion, clientId: `${clientId}-machine` });
    clients.push(gateway);
    const shown = (path: string) => displayPath(path, opts.cwd);
    view.intro([
      `qband demo: a simulated machine publishes its vibration and tach over MQTT;`,
      `the qband agent watches it live and publishes alarms and state; this view`,
      `shows what the agent publishes.`,
      `  broker   ${broker ? `embedded, ${url} (MQTT 3.1.1)` : `${url} (MQTT ${protocolVersion === 5 ? '5' : '3.1.1'})`}`,
      `  agent    ${clientId} on ${shown(opts.mapPath)}`,
      `           its log: ${logPath}`,
      `  machine  ${asset.id} at ${site} (fictional): ${opts.source.kind === 'recording' ? shown(opts.source.path) : 'synthesised from a speed profile'}, ${opts.speed}x real time`,
      `  view     ${topics.state}, ${topics.alarm}, ${statusTopic}`,
      ...(page ? [`  page     ${page.url} (operator page and /metrics while the run lasts)${opts.http?.token ? `; token to acknowledge: ${opts.http.token}` : ''}`] : []),
      '',
    ]);

    result.published = await publishMachine({
      client: gateway,
      asset,
      topicPrefix: prefix,
      source: opts.source,
      speed: opts.speed,
      format: opts.blockFormat,
      signal: opts.signal,
      onStart: (run) => {
        result.run = { site, asset, startS: run.startS, durationS: run.durationS, speed: run.speed };
        view.setRun(result.run);
      },
    });
    const published = result.published;
    if (!published.aborted) {
      const endS = published.run.startS + published.dataS;
      await waitUntil(() => (result.lastState?.t_s ?? -Infinity) >= endS - CATCH_UP_S, CATCH_UP_TIMEOUT_MS, opts.signal);
    } else view.note('stopping early (interrupted)');

    await page?.close();
    page = null;
    await agent.stop();
    agent = null;
    await waitUntil(() => result.presence.at(-1) === 'offline', OFFLINE_TIMEOUT_MS);
    await closeAll(clients);
    if (broker) await broker.close();
    broker = null;
    finished = true;
  } finally {
    if (!finished) {
      view.abandon();
      await page?.close().catch(() => undefined);
      await agent?.stop().catch(() => undefined);
      await closeAll(clients);
      await broker?.close();
    }
    logFile.flushSync();
    logFile.end();
  }

  view.finish({
    run: result.run ?? { site, asset, startS: 0, durationS: 0, speed: opts.speed },
    alarms: result.alarms,
    lastState: result.lastState,
    presence: result.presence,
    blocksPublished: result.published?.blocks ?? 0,
    topics: topics.samples.size,
    dataS: result.published?.dataS ?? 0,
    wallS: result.published?.wallS ?? 0,
    aborted: result.published?.aborted ?? true,
    logPath,
    broker: result.embedded ? `embedded at ${result.brokerUrl}, closed` : `${result.brokerUrl}; the agent's retained state and offline presence stay there`,
  });
  return result;
}

async function loadDemoAsset(mapPath: string): Promise<{ asset: AssetConfig; site: string; prefix: string }> {
  const text = await readFile(mapPath, 'utf8').catch((cause) => {
    throw new QbandError('QB_E_FILE_READ', `cannot read asset map '${mapPath}' (${(cause as NodeJS.ErrnoException).code ?? cause})`, { cause });
  });
  const { map, problems } = parseAssetMap(text, mapPath);
  if (!map) {
    throw new QbandError('QB_E_CONFIG_INVALID', `asset map ${mapPath} is not valid:\n${problems.map((p) => `  ${p.message} [${p.code}]`).join('\n')}`);
  }
  return { asset: map.assets[0], site: map.site, prefix: map.broker?.topicPrefix ?? 'qband' };
}

/** A path as a person would type it from where they are, when it lies below. */
function displayPath(path: string, cwd: string | undefined): string {
  if (!cwd) return path;
  const rel = relative(cwd, path);
  return rel === '' || rel.startsWith('..') || isAbsolute(rel) ? path : rel;
}

/** One of the agent's warnings or errors, from its JSON log line, as a line for people. */
function agentLogNote(line: string): string {
  try {
    const r = JSON.parse(line) as { level?: number; msg?: string; code?: string; reason?: string; topic?: string };
    const what = (r.level ?? 0) >= 50 ? 'agent error' : 'agent warning';
    return `  ${what}: ${r.msg ?? ''}${r.reason ? ` (${r.reason}${r.topic ? ` on ${r.topic}` : ''})` : ''} [${r.code ?? '?'}]`;
  } catch {
    return `  agent: ${line.trim()}`;
  }
}

/** Connects without a retry loop; rejects with the broker's refusal or on timeout. */
function connectClient(url: string, options: IClientOptions): Promise<MqttClient> {
  return new Promise((resolve, reject) => {
    const client = mqtt.connect(url, { ...options, reconnectPeriod: 0, connectTimeout: CONNECT_TIMEOUT_MS, clean: true });
    const fail = (err: Error) => {
      client.removeListener('connect', ok);
      client.end(true);
      reject(new QbandError('QB_E_BROKER', `cannot connect to the broker at ${url}: ${err.message}`, { cause: err }));
    };
    const closed = () => fail(new Error('connection closed before the broker accepted it'));
    const ok = () => {
      client.removeListener('error', fail);
      client.removeListener('close', closed);
      // Connected once: from now on ride out a dropped connection like the agent does.
      client.options.reconnectPeriod = 1000;
      resolve(client);
    };
    client.once('connect', ok);
    client.once('error', fail);
    client.once('close', closed);
  });
}

async function closeAll(clients: MqttClient[]): Promise<void> {
  await Promise.all(clients.splice(0).map((c) => c.endAsync().catch(() => undefined)));
}

function withTimeout<T>(p: Promise<T>, ms: number, message: string): Promise<T> {
  let timer: NodeJS.Timeout | undefined;
  const timeout = new Promise<never>((_, reject) => {
    timer = setTimeout(() => reject(new QbandError('QB_E_BROKER', message)), ms);
  });
  return Promise.race([p, timeout]).finally(() => clearTimeout(timer));
}

/** Polls `done` every 20 ms until true, `ms` elapse or the signal aborts. */
async function waitUntil(done: () => boolean, ms: number, signal?: AbortSignal): Promise<boolean> {
  const until = Date.now() + ms;
  while (!done()) {
    if (Date.now() >= until || signal?.aborted) return false;
    await new Promise((r) => setTimeout(r, 20));
  }
  return true;
}
