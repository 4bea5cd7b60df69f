/**
 * The live agent: one MQTT connection, one AssetRuntime per asset of the map, in the agent's
 * thread or spread over worker threads (workers/: the host of the runtimes, either way).
 *
 * Built from its parts (a validated map, a logger, a clock, a broker connector) so tests and
 * the demo build the very same agent with their own; `qband run` wires the real ones.
 *
 *   broker message -> topic -> asset -> host.message -> AssetRuntime.onMessage (its thread)
 *     -> result -> AgentOutput: journal events with their state, publish, observe()
 *   wall-clock tick (1 s) -> host.tick (freshness, stalled reorder buffers, overload rule,
 *     and every second the snapshots the journal keeps)
 *   map file changes -> reload: a valid map applies, keeping the dwell state and exposure of
 *     unchanged components; an invalid one is reported and the last good map stays.
 *
 * Presence: `<prefix>/agent/<client id>/status`, retained, `online` once connected and subscribed, and
 * `offline` as the MQTT last will (abrupt loss) or on a clean stop. It also carries the loaded
 * map's identity and the last configuration error.
 */
import type { SparkplugNode } from '../sparkplug/sparkplugNode.ts';
import type { Subscription } from 'rxjs';
import mqtt, { type MqttClient } from 'mqtt';
import type { ConfigProblem } from '../config/configProblem.ts';
import type { AssetConfig, SiteMap } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import type { Outbound, RuntimeSnapshot } from './assetRuntime.ts';
import { loadMap, type LoadedMap } from './loadMap.ts';
import { fileChanges, mapReloads } from './mapReloads.ts';
import { agentConnectOptions, defaultClientId, redactUrl } from './connectOptions.ts';
import type { Journal } from './journal.ts';
import { openAgentJournal, persistSnapshots } from './agentJournal.ts';
import { logLoadChange } from './agentLogs.ts';
import { AgentOutput } from './agentOutput.ts';
import { RateLimitedLog, type Logger } from './logger.ts';
import { holdAgentWrites, tuneAgentSocket } from './socketWrites.ts';
import { agentStatusTopic, assetTopics, inputTopics, type AssetTopics } from './topics.ts';
import type { RuntimeHost, RuntimeSpec } from './workers/runtimeHost.ts';
import { createRuntimeHost, workerCountFor } from './workers/workerCount.ts';
import type { AgentDeps, AgentOptions } from './agentOptions.ts';
import { presenceMessage, sameAgentSettings } from './presence.ts';

export type { AgentDeps, AgentOptions } from './agentOptions.ts';

export class Agent {
  readonly clientId: string;
  readonly prefix: string;
  private readonly opts: AgentOptions;
  private readonly log: Logger;
  private readonly now: () => number;
  private client!: MqttClient;
  /** The assets of the map in force, with their topics (their runtimes live in the host). */
  private assets = new Map<string, { asset: AssetConfig; topics: AssetTopics }>();
  /** Input topic -> asset. */
  private routes = new Map<string, string>();
  private loaded: LoadedMap;
  private configError: { message: string; problems: string[] } | null = null;
  private timer: NodeJS.Timeout | null = null;
  private mapWatch: Subscription | null = null;
  private readonly brokerLog = new RateLimitedLog(10_000);
  private stopped = false;
  private connectedOnce!: Promise<void>;
  private readonly journal: Journal | null;
  private readonly host: RuntimeHost;
  private readonly output: AgentOutput;
  private lastPersistMs = 0;
  private sparkplug: SparkplugNode | null = null;

  private constructor(opts: AgentOptions, deps: AgentDeps, loaded: LoadedMap) {
    this.opts = opts;
    this.log = deps.logger;
    this.now = deps.now ?? Date.now;
    this.loaded = loaded;
    this.prefix = loaded.map.broker?.topicPrefix ?? 'qband';
    this.clientId = opts.clientId ?? defaultClientId(loaded.map.site);
    this.journal = opts.stateDir ? openAgentJournal(opts.stateDir, this.log) : null;
    this.output = new AgentOutput(this.journal, this.log, this.now, (asset) => this.assets.get(asset)?.topics);
    const sink = {
      result: this.output.handle.bind(this.output),
      load: (change: Parameters<typeof logLoadChange>[0]) => logLoadChange(change, this.log),
      log: (l: { level: 'info' | 'warn' | 'error'; fields: Record<string, unknown>; msg: string }) => this.log[l.level](l.fields, l.msg),
    };
    this.host = createRuntimeHost(workerCountFor(opts.workers ?? 0, loaded.map.assets.length), sink, this.log);
  }

  /** Loads the map (refusing an invalid one), builds the agent and its runtimes, and starts connecting. */
  static async start(opts: AgentOptions, deps: AgentDeps): Promise<Agent> {
    const loaded = await loadMap(opts.mapPath);
    if ('problems' in loaded) {
      throw new QbandError('QB_E_CONFIG_INVALID', `asset map ${opts.mapPath} is not valid:\n${loaded.problems.map((p) => `  ${p.message} [${p.code}]`).join('\n')}`);
    }
    const brokerUrl = opts.brokerUrl ?? loaded.map.broker?.url;
    if (!brokerUrl) {
      throw new QbandError('QB_E_NO_BROKER', `no broker: the map ${opts.mapPath} has no broker.url and no --broker was given`);
    }
    const agent = new Agent(opts, deps, loaded);
    try {
      const specs = loaded.map.assets.map((a) => agent.spec(a, loaded, agent.journal?.snapshot(a.id)));
      for (const r of await agent.host.add(specs)) {
        agent.log.info({ stage: 'agent', code: 'QB_I_RESUME', asset: r.asset, restored: r.restored, fresh: r.fresh }, 'state restored from the journal');
      }
    } catch (err) {
      await agent.host.stop().catch(() => undefined);
      agent.journal?.close();
      throw err;
    }
    agent.setAssets(loaded.map.assets);
    agent.connect(brokerUrl, deps);
    agent.log.info(
      { stage: 'agent', code: 'QB_I_START', map: opts.mapPath, site: loaded.map.site, assets: loaded.map.assets.map((a) => a.id), broker: redactUrl(brokerUrl), client_id: agent.clientId, workers: agent.host.workerCount },
      'qband agent starting (advisory only: it never stops a machine)',
    );
    agent.timer = setInterval(() => agent.onTick(), opts.tickMs ?? 1000);
    if (opts.watchMap !== false) agent.watchMap();
    // Sparkplug B output (src/sparkplug/), on its own connection, fed through observe(); loaded only when used.
    const spb = loaded.map.sparkplug;
    if (spb) agent.sparkplug = new (await import('../sparkplug/sparkplugNode.ts')).SparkplugNode({ ...opts, ...deps, config: spb, brokerUrl, agentClientId: agent.clientId, protocolVersion: opts.protocolVersion ?? 5, site: loaded.map.site, observe: (l) => agent.observe(l), assets: () => [...agent.assets.keys()] });
    return agent;
  }

  private connect(brokerUrl: string, deps: AgentDeps): void {
    const opts = this.opts;
    const connect = deps.connect ?? mqtt.connect;
    this.client = connect(
      brokerUrl,
      agentConnectOptions({
        clientId: this.clientId,
        protocolVersion: opts.protocolVersion ?? 5,
        sessionExpiryS: this.loaded.map.agent.sessionExpiryS,
        extra: opts.connectOptions,
        will: { topic: this.statusTopic, payload: Buffer.from(JSON.stringify(this.presence('offline'))) },
      }),
    );
    this.output.client = this.client;
    let subscribed: () => void = () => undefined;
    this.connectedOnce = new Promise((resolve) => (subscribed = resolve));
    tuneAgentSocket(this.client); // no Nagle; the acknowledgements of one read in one write
    this.client.on('connect', (connack) => this.onConnect(subscribed, connack.sessionPresent));
    this.client.on('message', (topic, payload) => this.onMessage(topic, payload));
    // Flow control: while the workers have too much in hand, the next packet is not read from
    // the socket (mqtt.js reads on once this is called back), so the rest waits in TCP and at
    // the broker; the PUBACK of a QoS 1 message leaves when it is called back.
    this.client.handleMessage = (_packet, callback) => this.host.whenReady(() => (holdAgentWrites(this.client), callback()));
    // Reconnection is retried every second; say so at most every 10 s, with the count held back.
    this.client.on('error', (err) => {
      const held = this.brokerLog.admit(`error|${err.message}`, this.now());
      if (held !== null) this.log.error({ stage: 'broker', code: 'QB_E_BROKER', err: err.message, held_back: held }, 'broker connection error');
    });
    this.client.on('offline', () => {
      const held = this.brokerLog.admit('offline', this.now());
      // A broker without MQTT 5 closes an MQTT 5 connect unanswered: say so rather than just "unreachable".
      const hint = (opts.protocolVersion ?? 5) === 5 ? ' (a broker that does not speak MQTT 5 closes the connection unanswered: try --mqtt-version 3.1.1)' : '';
      if (held !== null) this.log.warn({ stage: 'broker', code: 'QB_E_BROKER', held_back: held }, `broker unreachable or connection closed before it was accepted${hint}; retrying every second`);
    });
  }

  /** Resolves once the first connection to the broker is up and the input topics are subscribed. */
  ready(): Promise<void> {
    return this.connectedOnce;
  }

  get statusTopic(): string {
    return agentStatusTopic(this.prefix, this.clientId);
  }

  /** Worker threads the runtimes run on (0: the agent's own thread). */
  get workers(): number {
    return this.host.workerCount;
  }

  /**
   * Clean stop: offline presence published, subscriptions and timers released, every input
   * taken in handled (its events journaled), the runtimes' last state written, workers ended.
   */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    if (this.timer) clearInterval(this.timer);
    this.mapWatch?.unsubscribe();
    await this.sparkplug?.stop();
    if (this.client.connected) {
      await this.client.publishAsync(this.statusTopic, JSON.stringify(this.presence('offline')), { qos: 1, retain: true }).catch(() => undefined);
    }
    await this.client.endAsync();
    const last = await this.host.stop();
    if (this.journal) persistSnapshots(this.journal, last, this.log);
    this.journal?.close();
    this.log.info({ stage: 'agent', code: 'QB_I_STOP' }, 'qband agent stopped');
  }

  /** Re-reads the map file; returns whether it was applied. */
  async reload(): Promise<boolean> {
    let loaded: LoadedMap | { problems: ConfigProblem[] };
    try {
      loaded = await loadMap(this.opts.mapPath);
    } catch (err) {
      loaded = { problems: [{ code: 'QB_E_FILE_READ', message: (err as Error).message } as ConfigProblem] };
    }
    if ('problems' in loaded) {
      this.configError = { message: `asset map ${this.opts.mapPath} not applied; still running on the last good map`, problems: loaded.problems.map((p) => `${p.message} [${p.code}]`) };
      this.log.error({ stage: 'config', code: 'QB_E_CONFIG_RELOAD', problems: this.configError.problems }, this.configError.message);
      this.publishPresence();
      return false;
    }
    if (loaded.sha256 === this.loaded.sha256) return true;
    const map = loaded.map;
    if ((map.broker?.topicPrefix ?? 'qband') !== this.prefix || (map.broker?.url ?? null) !== (this.loaded.map.broker?.url ?? null)) {
      this.log.warn({ stage: 'config', code: 'QB_E_CONFIG_RELOAD' }, 'broker url or topic prefix changed: they apply at the next start');
    }
    // Unchanged assets keep their runtime; a changed one resumes from its old runtime's state.
    const changed: RuntimeSpec[] = [];
    const added: RuntimeSpec[] = [];
    for (const asset of map.assets) {
      const old = this.assets.get(asset.id);
      if (old && JSON.stringify(old.asset) === JSON.stringify(asset) && sameAgentSettings(this.loaded.map, map)) continue;
      (old ? changed : added).push(this.spec(asset, loaded));
    }
    const gone = [...this.assets.keys()].filter((id) => !map.assets.some((a) => a.id === id));
    const before = new Set(this.routes.keys());
    await this.host.remove(gone);
    for (const r of await this.host.replace(changed)) {
      this.log.info({ stage: 'config', code: 'QB_I_RELOAD', asset: r.asset, restored: r.restored, fresh: r.fresh }, 'asset reloaded');
    }
    await this.host.add(added);
    // An asset that left the map: its retained state is cleared so dashboards do not show a ghost.
    for (const id of gone) this.client.publish(`${this.prefix}/${id}/state`, '', { qos: 1, retain: true });
    this.loaded = loaded;
    this.setAssets(map.assets);
    const after = new Set(this.routes.keys());
    const unsubscribe = [...before].filter((t) => !after.has(t));
    const subscribe = [...after].filter((t) => !before.has(t));
    if (unsubscribe.length) this.client.unsubscribe(unsubscribe);
    if (subscribe.length) this.client.subscribe(subscribe, { qos: 1 });
    this.configError = null;
    this.publishPresence();
    this.log.info({ stage: 'config', code: 'QB_I_RELOAD', map: this.opts.mapPath, sha256: loaded.sha256 }, 'asset map applied');
    return true;
  }

  private spec(asset: AssetConfig, loaded: LoadedMap, saved?: RuntimeSnapshot): RuntimeSpec {
    return { asset, agent: loaded.map.agent, prefix: this.prefix, mapText: loaded.text, stateDir: this.opts.stateDir ?? null, ...(saved ? { saved } : {}) };
  }

  private setAssets(assets: readonly AssetConfig[]): void {
    this.assets = new Map(assets.map((asset) => [asset.id, { asset, topics: assetTopics(asset, this.prefix) }]));
    this.routes = new Map();
    for (const [id, { topics }] of this.assets) for (const topic of inputTopics(topics)) this.routes.set(topic, id);
  }

  private onConnect(subscribed: () => void, sessionPresent: boolean): void {
    this.log.info({ stage: 'broker', code: 'QB_I_CONNECTED', client_id: this.clientId, session_present: sessionPresent }, 'connected to broker');
    // Events the broker has not acknowledged (from before an outage or a restart) go first,
    // in order, with their original ids.
    this.output.republishPending();
    const topics = [...this.routes.keys()];
    this.client.subscribe(topics, { qos: 1 }, (err, granted) => {
      // Online once the input topics are subscribed: a gateway that waits for it loses nothing.
      this.publishPresence();
      if (err) {
        this.log.error({ stage: 'broker', code: 'QB_E_BROKER', err: err.message }, 'subscription refused');
        return;
      }
      // A broker refuses a topic its ACL forbids with a granted QoS of 128 (0x80 or above).
      const refused = (granted ?? []).filter((g) => g.qos >= 128).map((g) => g.topic);
      if (refused.length > 0) {
        this.log.error({ stage: 'broker', code: 'QB_E_BROKER', topics: refused }, 'the broker refused subscriptions: check its ACL for this client');
      }
      subscribed();
    });
  }

  private onMessage(topic: string, payload: Buffer): void {
    const asset = this.routes.get(topic);
    if (asset !== undefined) this.host.message(asset, topic, payload, this.now());
  }

  /** The wall-clock tick; every `persistEveryMs` it also asks for the snapshots the journal keeps. */
  private onTick(): void {
    const nowMs = this.now();
    const persist = this.journal !== null && nowMs - this.lastPersistMs >= (this.opts.persistEveryMs ?? 1000);
    if (persist) this.lastPersistMs = nowMs;
    this.host.tick(nowMs, persist);
  }

  /**
   * Calls `listener` with every message an asset's runtime produces (alarms, state, transients,
   * identifications, refusals), as it is handed to the broker, one asset's in their order. For
   * views built on what the agent says (an operator page, another protocol); returns the
   * function that stops the calls.
   */
  observe(listener: (asset: string, message: Outbound) => void): () => void {
    return this.output.observe(listener);
  }

  /** Whether the broker connection is up now. */
  get connected(): boolean {
    return this.client.connected;
  }

  /** The map in force (the operator page draws its diagrams from it). */
  get map(): SiteMap {
    return this.loaded.map;
  }

  /** Alarm events journaled and not yet acknowledged by the broker. */
  get journalPending(): number {
    return this.journal?.pending().length ?? 0;
  }

  /**
   * An operator command from another view (the operator page), handled as if it came on the
   * asset's command topic; resolves with what it produced once that has been journaled and
   * published, or null for an asset not in the map.
   */
  async command(asset: string, payload: Uint8Array): Promise<Outbound[] | null> {
    if (!this.assets.has(asset)) return null;
    return (await this.host.command(asset, payload, this.now())).out;
  }

  private presence(state: 'online' | 'offline') {
    return presenceMessage(state, {
      clientId: this.clientId,
      site: this.loaded.map.site,
      mapPath: this.opts.mapPath,
      sha256: this.loaded.sha256,
      assets: this.loaded.map.assets.map((a) => a.id),
      configError: this.configError,
      nowMs: this.now(),
    });
  }

  private publishPresence(): void {
    this.client.publish(this.statusTopic, JSON.stringify(this.presence('online')), { qos: 1, retain: true });
  }

  private watchMap(): void {
    // Settled for 250 ms, one reload at a time (mapReloads.ts).
    this.mapWatch = mapReloads(fileChanges(this.opts.mapPath), () => this.reload(), 250).subscribe({
      error: (err: Error) => this.log.warn({ stage: 'config', code: 'QB_E_CONFIG_RELOAD', err: err.message }, 'cannot watch the map file; reload needs a restart'),
    });
  }
}
