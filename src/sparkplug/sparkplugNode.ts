/**
 * The live agent as a Sparkplug B edge node, each asset a device (rules in sparkplugSession.ts).
 *
 * Its own MQTT connection: the agent's connection already carries a last will (its retained
 * presence, docs/topics.md) and MQTT allows one will per connection, while Sparkplug needs the
 * node's NDEATH to be the will of the connection that published its NBIRTH. A second connection
 * (client id `<agent client id>-spb`, clean session, as Sparkplug asks) satisfies both, and each
 * death reports what it should: the presence topic says the agent is gone, NDEATH that the edge
 * node is. Both connections die together when the process does.
 *
 * Fed by the agent's observe() hook through deviceUpdates.ts (RxJS): each asset's state message
 * becomes that device's DBIRTH or DDATA; an asset a reload removed gets its DDEATH. Births again after each reconnection and on an NCMD
 * `Node Control/Rebirth`. bdSeq goes up with each connection and is kept in the state directory
 * so that a restarted agent does not reuse the last one.
 */
import { existsSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { Subject, type Subscription } from 'rxjs';
import sparkplugPayload from 'sparkplug-payload';
import type { SparkplugConfig } from '../config/types.ts';
import type { Logger } from '../agent/logger.ts';
import { deviceMetrics, type DeviceMetric } from './deviceMetrics.ts';
import { deviceUpdates, observed, type ObserveHook } from './deviceUpdates.ts';
import { REBIRTH_METRIC, SparkplugSession, type Frame } from './sparkplugSession.ts';

const codec = sparkplugPayload.get('spBv1.0')!;
type CodecPayload = Parameters<typeof codec.encodePayload>[0];

export function encodeFrame(frame: Frame): Buffer {
  return Buffer.from(codec.encodePayload(frame.payload as unknown as CodecPayload));
}

export interface SparkplugNodeOptions {
  config: SparkplugConfig;
  brokerUrl: string;
  /** The agent's client id; this connection uses `<id>-spb`. */
  agentClientId: string;
  protocolVersion: 4 | 5;
  connectOptions?: Partial<IClientOptions>;
  stateDir?: string | null;
  site: string;
  observe: ObserveHook;
  /** The map's asset ids now (they change with reloads): a born device no longer among them dies. */
  assets: () => readonly string[];
  logger: Logger;
  now?: () => number;
  connect?: (url: string, options: IClientOptions) => MqttClient;
}

export class SparkplugNode {
  private readonly session: SparkplugSession;
  private readonly client: MqttClient;
  private readonly latest = new Map<string, DeviceMetric[]>();
  private readonly stop$ = new Subject<void>();
  private readonly subscription: Subscription;
  private readonly now: () => number;
  private readonly log: Logger;
  private born = false;
  private stopped = false;
  /** The bdSeq the next connection takes; -1 before the first (then read from the state directory). */
  private nextBdSeq = -1;

  constructor(private readonly opts: SparkplugNodeOptions) {
    this.now = opts.now ?? Date.now;
    this.log = opts.logger;
    const { groupId, edgeNodeId } = opts.config;
    this.session = new SparkplugSession(groupId, edgeNodeId, this.takeBdSeq(), [{ name: 'Properties/site', type: 'String', value: opts.site }]);
    const connect = opts.connect ?? mqtt.connect;
    this.client = connect(opts.brokerUrl, {
      ...opts.connectOptions,
      clientId: `${opts.agentClientId}-spb`.slice(0, 64),
      protocolVersion: opts.protocolVersion,
      clean: true,
      ...(opts.protocolVersion === 5 ? { properties: { ...opts.connectOptions?.properties, sessionExpiryInterval: 0 } } : {}),
      reconnectPeriod: 1000,
      connectTimeout: 10_000,
      will: this.will(),
    });
    this.client.on('connect', () => this.onConnect());
    this.client.on('close', () => this.onClose());
    this.client.on('message', (topic, payload) => this.onCommand(topic, payload));
    this.client.on('error', (err) => this.log.error({ stage: 'sparkplug', code: 'QB_E_BROKER', err: err.message }, 'Sparkplug connection error'));
    this.subscription = deviceUpdates(observed(opts.observe), opts.config.minDataIntervalS * 1000, this.stop$).subscribe(({ asset, state }) => {
      const metrics = deviceMetrics(state);
      this.latest.set(asset, metrics);
      this.buryRemoved();
      if (this.born) this.send(this.session.update(asset, metrics, this.now()));
    });
  }

  /** Clean stop: NDEATH published (a host must not wait for the broker to notice), then disconnect. */
  async stop(): Promise<void> {
    if (this.stopped) return;
    this.stopped = true;
    this.stop$.next();
    this.subscription.unsubscribe();
    if (this.client.connected) {
      const death = this.session.ndeath(this.now());
      await this.client.publishAsync(death.topic, encodeFrame(death), { qos: 1, retain: false }).catch(() => undefined);
    }
    await this.client.endAsync();
  }

  get connected(): boolean {
    return this.client.connected;
  }

  private will(): IClientOptions['will'] {
    const death = this.session.ndeath(this.now());
    return { topic: death.topic, payload: encodeFrame(death), qos: 1, retain: false };
  }

  private onConnect(): void {
    this.client.subscribe(this.session.nodeTopic('NCMD'), { qos: 0 }, (err) => {
      if (err) this.log.error({ stage: 'sparkplug', code: 'QB_E_BROKER', err: err.message }, 'Sparkplug command subscription refused');
    });
    this.birth('connect');
  }

  /** NBIRTH, then a DBIRTH for every device with a state so far. */
  private birth(cause: 'connect' | 'rebirth'): void {
    this.send(this.session.nbirth(this.now()));
    this.born = true;
    for (const [asset, metrics] of this.latest) this.send(this.session.update(asset, metrics, this.now()));
    this.log.info(
      { stage: 'sparkplug', code: 'QB_I_SPARKPLUG_BIRTH', cause, bd_seq: this.session.bdSeq, topic: this.session.nodeTopic('NBIRTH'), devices: this.session.devices },
      'Sparkplug edge node born',
    );
  }

  /** DDEATH for each device whose asset a reload removed from the map. */
  private buryRemoved(): void {
    const current = new Set(this.opts.assets());
    for (const device of [...this.latest.keys()]) {
      if (current.has(device)) continue;
      this.latest.delete(device);
      if (this.born) this.send(this.session.deviceDeath(device, this.now()));
    }
  }

  /** The connection is gone: the broker sends the NDEATH; the next connection has the next bdSeq. */
  private onClose(): void {
    if (!this.born) return;
    this.born = false;
    this.session.bdSeq = this.takeBdSeq();
    // mqtt.js sends the options' will with each reconnection.
    this.client.options.will = this.will();
  }

  private onCommand(topic: string, payload: Buffer): void {
    if (topic !== this.session.nodeTopic('NCMD')) return;
    let rebirth = false;
    try {
      rebirth = (codec.decodePayload(payload).metrics ?? []).some((m) => m.name === REBIRTH_METRIC && m.value === true);
    } catch (err) {
      this.log.warn({ stage: 'sparkplug', code: 'QB_E_SPARKPLUG_COMMAND', topic, err: (err as Error).message }, 'Sparkplug command not readable; ignored');
      return;
    }
    if (rebirth && this.client.connected) this.birth('rebirth');
  }

  private send(frame: Frame | null): void {
    if (!frame || !this.client.connected) return;
    this.client.publish(frame.topic, encodeFrame(frame), { qos: frame.qos, retain: false }, (err) => {
      if (err) this.log.warn({ stage: 'sparkplug', code: 'QB_E_PUBLISH', topic: frame.topic, err: err.message }, 'Sparkplug message not published');
    });
  }

  /** This connection's bdSeq (0..255); the next one is kept in the state directory. */
  private takeBdSeq(): number {
    const file = this.opts.stateDir ? join(this.opts.stateDir, 'sparkplug-bdseq') : null;
    let bdSeq = this.nextBdSeq;
    if (file && existsSync(file)) {
      const saved = Number(readFileSync(file, 'utf8').trim());
      if (Number.isInteger(saved) && saved >= 0 && saved < 256 && this.nextBdSeq === -1) bdSeq = saved;
    }
    if (bdSeq < 0) bdSeq = 0;
    this.nextBdSeq = (bdSeq + 1) % 256;
    if (file) {
      try {
        writeFileSync(file, `${this.nextBdSeq}\n`);
      } catch (err) {
        this.log.warn({ stage: 'sparkplug', code: 'QB_E_FILE_WRITE', err: (err as Error).message }, 'Sparkplug bdSeq not kept');
      }
    }
    return bdSeq;
  }
}
