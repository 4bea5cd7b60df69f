/**
 * The live agent: one MQTT connection, one AssetRuntime per asset of the map.
 *
 * Built from its parts (a validated map, a logger, a clock, a broker connector) so tests and
 * the demo build the very same agent with their own; `qband run` wires the real ones.
 *
 *   broker message -> topic -> AssetRuntime.onMessage -> publish what it returns
 *   wall-clock tick (1 s) -> AssetRuntime.tick (freshness, stalled reorder buffers)
 *   map file changes -> reload: a valid map applies, keeping the dwell state and exposure of
 *     unchanged components; an invalid one is reported and the last good map stays.
 *
 * Presence: `<prefix>/agent/<client id>/status`, retained, `online` once connected and
 * `offline` as the MQTT last will (abrupt loss) or on a clean stop. It also carries the loaded
 * map's identity and the last configuration error.
 */
import type { SparkplugNode } from '../sparkplug/sparkplugNode.ts';
import type { Subscription } from 'rxjs';
import mqtt, { type MqttClient } from 'mqtt';
import type { ConfigProblem } from '../config/configProblem.ts';
import type { AssetConfig, SiteMap } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import { createRealFft, type RealFft } from '../manipulation/realFft.ts';
import { AssetRuntime, type Outbound, type RuntimeResult } from './assetRuntime.ts';
import { BusyMeter } from './busyMeter.ts';
import { loadMap, type LoadedMap } from './loadMap.ts';
import { fileChanges, mapReloads } from './mapReloads.ts';
import { agentConnectOptions, defaultClientId, redactUrl } from './connectOptions.ts';
import type { Journal, JournalEvent } from './journal.ts';
import { openAgentJournal, persistSnapshots } from './agentJournal.ts';
import { applyLoadRule, logDrops } from './agentLogs.ts';
import { attachTransientStore } from './transientStore.ts';
import { RateLimitedLog, type Logger } from './logger.ts';
import { tuneAgentSocket } from './socketWrites.ts';
import { agentStatusTopic } from './topics.ts';
import type { AgentDeps, AgentOptions } from './agentOptions.ts';
import { presenceMessage, sameAgentSettings } from './presence.ts';

export type { AgentDeps, AgentOptions } from './agentOptions.ts';

export class Agent {
  readonly clientId: string;
  readonly prefix: string;
  private readonly opts: AgentOptions;
  private readonly log: Logger;
  private readonly now: () => number;
  private readonly client: MqttClient;
  private runtimes = new Map<string, AssetRuntime>();
  private routes = new Map<string, AssetRuntime>();
  private loaded: LoadedMap;
  private configError: { message: string; problems: string[] } | null = null;
  private readonly ffts = new Map<number, RealFft>();
  private timer: NodeJS.Timeout | null = null;
  private mapWatch: Subscription | null = null;
  private readonly dropLog = new RateLimitedLog(10_000);
  private readonly brokerLog = new RateLimitedLog(10_000);
  private stopped = false;
  private readonly connectedOnce: Promise<void>;
  private readonly journal: Journal | null;
  private readonly observers = new Set<(asset: string, message: Outbound) => void>();
  /** Journal seqs handed to the client and not yet answered (acknowledged or failed). */
  private readonly inFlight = new Set<number>();
  private lastPersistMs = 0;
  private readonly load = new BusyMeter();
  private sparkplug: SparkplugNode | null = null;

  private constructor(opts: AgentOptions, deps: AgentDeps, loaded: LoadedMap, ffts: Map<number, RealFft>, brokerUrl: string) {
    this.opts = opts;
    this.log = deps.logger;
    this.now = deps.now ?? Date.now;
    this.loaded = loaded;
    this.ffts = ffts;
    this.prefix = loaded.map.broker?.topicPrefix ?? 'qband';
    this.clientId = opts.clientId ?? defaultClientId(loaded.map.site);
    this.journal = opts.stateDir ? openAgentJournal(opts.stateDir, this.log) : null;
    for (const asset of loaded.map.assets) {
      const runtime = this.newRuntime(asset);
      const saved = this.journal?.snapshot(asset.id);
      if (saved) {
        const { restored, fresh } = runtime.restore(saved);
        this.log.info({ stage: 'agent', code: 'QB_I_RESUME', asset: asset.id, restored, fresh }, 'state restored from the journal');
      }
      this.runtimes.set(asset.id, runtime);
    }
    this.rebuildRoutes();

    const connect = deps.connect ?? mqtt.connect;
    this.client = connect(
      brokerUrl,
      agentConnectOptions({
        clientId: this.clientId,
        protocolVersion: opts.protocolVersion ?? 5,
        sessionExpiryS: loaded.map.agent.sessionExpiryS,
        extra: opts.connectOptions,
        will: { topic: this.statusTopic, payload: Buffer.from(JSON.stringify(this.presence('offline'))) },
      }),
    );
    let subscribed: () => void = () => undefined;
    this.connectedOnce = new Promise((resolve) => (subscribed = resolve));
    tuneAgentSocket(this.client); // no Nagle; the acknowledgements of one read in one write
    this.client.on('connect', (connack) => this.onConnect(subscribed, connack.sessionPresent));
    this.client.on('message', (topic, payload) => this.onMessage(topic, payload));
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

  /** Loads the map (refusing an invalid one), builds the agent and starts connecting. */
  static async start(opts: AgentOptions, deps: AgentDeps): Promise<Agent> {
    const loaded = await loadMap(opts.mapPath);
    if ('problems' in loaded) {
      throw new QbandError('QB_E_CONFIG_INVALID', `asset map ${opts.mapPath} is not valid:\n${loaded.problems.map((p) => `  ${p.message} [${p.code}]`).join('\n')}`);
    }
    const brokerUrl = opts.brokerUrl ?? loaded.map.broker?.url;
    if (!brokerUrl) {
      throw new QbandError('QB_E_NO_BROKER', `no broker: the map ${opts.mapPath} has no broker.url and no --broker was given`);
    }
    const ffts = new Map<number, RealFft>();
    for (const a of loaded.map.assets) {
      if (!ffts.has(a.analysis.frameSize)) ffts.set(a.analysis.frameSize, await createRealFft(a.analysis.frameSize));
    }
    const agent = new Agent(opts, deps, loaded, ffts, brokerUrl);
    agent.log.info(
      { stage: 'agent', code: 'QB_I_START', map: opts.mapPath, site: loaded.map.site, assets: loaded.map.assets.map((a) => a.id), broker: redactUrl(brokerUrl), client_id: agent.clientId },
      'qband agent starting (advisory only: it never stops a machine)',
    );
    agent.timer = setInterval(() => agent.onTick(), opts.tickMs ?? 1000);
    if (opts.watchMap !== false) agent.watchMap();
    // Sparkplug B output (src/sparkplug/), on its own connection, fed through observe(); loaded only when used.
    const spb = loaded.map.sparkplug;
    if (spb) agent.sparkplug = new (await import('../sparkplug/sparkplugNode.ts')).SparkplugNode({ ...opts, ...deps, config: spb, brokerUrl, agentClientId: agent.clientId, protocolVersion: opts.protocolVersion ?? 5, site: loaded.map.site, observe: (l) => agent.observe(l), assets: () => [...agent.runtimes.keys()] });
    return agent;
  }

  /** Resolves once the first connection to the broker is up and the input topics are subscribed. */
  ready(): Promise<void> {
    return this.connectedOnce;
  }

  get statusTopic(): string {
    return agentStatusTopic(this.prefix, this.clientId);
  }

  /** Clean stop: offline presence published, subscriptions and timers released. */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    if (this.timer) clearInterval(this.timer);
    this.mapWatch?.unsubscribe();
    this.persist(true);
    await this.sparkplug?.stop();
    if (this.client.connected) {
      await this.client.publishAsync(this.statusTopic, JSON.stringify(this.presence('offline')), { qos: 1, retain: true }).catch(() => undefined);
    }
    await this.client.endAsync();
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
    for (const a of map.assets) {
      if (!this.ffts.has(a.analysis.frameSize)) this.ffts.set(a.analysis.frameSize, await createRealFft(a.analysis.frameSize));
    }
    const before = new Set(this.routes.keys());
    const next = new Map<string, AssetRuntime>();
    for (const asset of map.assets) {
      const old = this.runtimes.get(asset.id);
      if (old && JSON.stringify(old.asset) === JSON.stringify(asset) && sameAgentSettings(this.loaded.map, map)) {
        next.set(asset.id, old);
        continue;
      }
      const runtime = this.newRuntime(asset, map, loaded.text);
      if (old) {
        const { restored, fresh } = runtime.restore(old.snapshot());
        this.log.info({ stage: 'config', code: 'QB_I_RELOAD', asset: asset.id, restored, fresh }, 'asset reloaded');
      }
      next.set(asset.id, runtime);
    }
    for (const id of this.runtimes.keys()) {
      if (!next.has(id)) {
        // The asset left the map: clear its retained state so dashboards do not show a ghost.
        this.client.publish(`${this.prefix}/${id}/state`, '', { qos: 1, retain: true });
      }
    }
    this.runtimes = next;
    this.loaded = loaded;
    this.rebuildRoutes();
    const after = new Set(this.routes.keys());
    const gone = [...before].filter((t) => !after.has(t));
    const added = [...after].filter((t) => !before.has(t));
    if (gone.length) this.client.unsubscribe(gone);
    if (added.length) this.client.subscribe(added, { qos: 1 });
    this.configError = null;
    this.publishPresence();
    this.log.info({ stage: 'config', code: 'QB_I_RELOAD', map: this.opts.mapPath, sha256: loaded.sha256 }, 'asset map applied');
    return true;
  }

  private newRuntime(asset: AssetConfig, map: SiteMap = this.loaded.map, text: string = this.loaded.text): AssetRuntime {
    const runtime = new AssetRuntime(asset, map.agent, this.prefix, this.ffts.get(asset.analysis.frameSize) as RealFft);
    attachTransientStore(runtime, this.opts.stateDir ?? null, text, this.log);
    return runtime;
  }

  private rebuildRoutes(): void {
    this.routes = new Map();
    for (const runtime of this.runtimes.values()) for (const topic of runtime.subscriptions()) this.routes.set(topic, runtime);
  }

  private onConnect(subscribed: () => void, sessionPresent: boolean): void {
    this.log.info({ stage: 'broker', code: 'QB_I_CONNECTED', client_id: this.clientId, session_present: sessionPresent }, 'connected to broker');
    this.publishPresence();
    // Events the broker has not acknowledged (from before an outage or a restart) go first,
    // in order, with their original ids.
    const pending = this.journal?.pending().filter((e) => !this.inFlight.has(e.seq)) ?? [];
    if (pending.length > 0) {
      this.log.info({ stage: 'advisory', code: 'QB_I_REPUBLISH', count: pending.length }, 'publishing alarm events the broker had not acknowledged');
      for (const e of pending) this.publishJournaled(e);
    }
    const topics = [...this.routes.keys()];
    this.client.subscribe(topics, { qos: 1 }, (err, granted) => {
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
    const runtime = this.routes.get(topic);
    if (!runtime) return;
    let result: RuntimeResult;
    const startMs = performance.now();
    try {
      result = runtime.onMessage(topic, payload, this.now());
      this.load.add(performance.now() - startMs);
    } catch (err) {
      // A bug must not take the agent down: count it, say it, keep watching.
      this.log.error({ stage: 'agent', code: 'QB_E_INTERNAL', asset: runtime.asset.id, topic, err: (err as Error).stack }, 'message handling failed');
      return;
    }
    this.handle(runtime, result);
  }

  private onTick(): void {
    this.persist(false);
    this.checkLoad();
    for (const runtime of this.runtimes.values()) {
      try {
        this.handle(runtime, runtime.tick(this.now()));
      } catch (err) {
        this.log.error({ stage: 'agent', code: 'QB_E_INTERNAL', asset: runtime.asset.id, err: (err as Error).stack }, 'tick failed');
      }
    }
  }

  private handle(runtime: AssetRuntime, result: RuntimeResult): void {
    logDrops(runtime, result.drops, this.dropLog, this.log, this.now());
    const events = result.out.filter((o) => o.kind === 'alarm' || o.kind === 'lifecycle');
    if (this.journal && events.length > 0) {
      // Durable before published: the events and the state that produced them, in one record.
      const journaled = this.journal.appendEvents(
        runtime.asset.id,
        events.map((o) => ({ id: o.id as string, topic: o.topic, payload: o.payload })),
        runtime.snapshot(),
      );
      for (const e of journaled) {
        this.log.info({ stage: 'advisory', code: 'QB_I_ALARM', asset: runtime.asset.id, id: e.id, topic: e.topic }, 'alarm event journaled and published');
        this.publishJournaled(e);
      }
    }
    for (const o of result.out) if (!this.journal || (o.kind !== 'alarm' && o.kind !== 'lifecycle')) this.publish(runtime, o);
    if (this.observers.size > 0) for (const o of result.out) for (const f of this.observers) f(runtime.asset.id, o);
  }

  /**
   * Calls `listener` with every message an asset's runtime produces (alarms, state, transients,
   * identifications, refusals), as it is handed to the broker. For views built on what the agent
   * says (an operator page, another protocol); returns the function that stops the calls.
   */
  observe(listener: (asset: string, message: Outbound) => void): () => void {
    this.observers.add(listener);
    return () => void this.observers.delete(listener);
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

  /** An operator command from another view (the operator page), handled as if it came on the asset's command topic. */
  command(asset: string, payload: Uint8Array): Outbound[] | null {
    const runtime = this.runtimes.get(asset);
    if (!runtime) return null;
    const result = runtime.onMessage(runtime.topics.command, payload, this.now());
    this.handle(runtime, result);
    return result.out;
  }

  private publishJournaled(e: JournalEvent): void {
    if (!this.client.connected) return; // published on reconnection, from the journal
    this.inFlight.add(e.seq);
    this.client.publish(e.topic, e.payload, { qos: 1, retain: false }, (err) => {
      this.inFlight.delete(e.seq);
      if (err) {
        this.log.warn({ stage: 'advisory', code: 'QB_E_PUBLISH', id: e.id, topic: e.topic, err: err.message }, 'alarm event not acknowledged; it stays pending');
        return;
      }
      this.journal?.acknowledge([e.seq]);
    });
  }

  /** The overload rule (busyMeter.ts): every asset sheds its spectra while the agent is overloaded. */
  private checkLoad(): void {
    applyLoadRule(this.load, this.runtimes.values(), this.log);
  }


  /** Periodic state snapshots into the journal, so a restart resumes dwell and exposure. */
  private persist(force: boolean): void {
    if (!this.journal) return;
    const nowMs = this.now();
    if (!force && nowMs - this.lastPersistMs < (this.opts.persistEveryMs ?? 1000)) return;
    this.lastPersistMs = nowMs;
    persistSnapshots(this.journal, this.runtimes.values(), this.log);
  }

  private publish(runtime: AssetRuntime, o: Outbound): void {
    if (o.kind === 'alarm' || o.kind === 'lifecycle') {
      this.log.info({ stage: 'advisory', code: 'QB_I_ALARM', asset: runtime.asset.id, id: o.id, topic: o.topic }, 'alarm event published');
    }
    this.client.publish(o.topic, o.payload, { qos: o.qos, retain: o.retain }, (err) => {
      if (err) this.log.error({ stage: 'advisory', code: 'QB_E_PUBLISH', asset: runtime.asset.id, topic: o.topic, id: o.id, err: err.message }, 'publish failed');
    });
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
