/**
 * One Sparkplug B edge node's message rules (spBv1.0 namespace; what follows is written from
 * memory of the open Eclipse Sparkplug 3.0 specification, not checked against its text):
 *
 * - Topics: spBv1.0/<group>/NBIRTH|NDEATH|NDATA|NCMD/<edge node> and
 *   spBv1.0/<group>/DBIRTH|DDEATH|DDATA|DCMD/<edge node>/<device>.
 * - bdSeq: a number 0..255 carried as the Int64 metric `bdSeq` in the NDEATH that is the MQTT will
 *   of a connection and in the NBIRTH published on that connection, so a host can tell which
 *   birth a death belongs to; it goes up by one with every new connection (wrapping at 256).
 * - seq: NBIRTH carries 0; every later message of the node (DBIRTH, DDATA, DDEATH, NDATA) the
 *   next value, wrapping from 255 to 0. NDEATH carries none. A rebirth starts again at 0.
 * - NBIRTH lists the node's metrics with `Node Control/Rebirth` (Boolean, false); an NCMD that
 *   sets it true asks for NBIRTH and every DBIRTH again.
 * - A device's DBIRTH lists all its metrics; DDATA only those that changed. A metric not in the
 *   DBIRTH needs a new DBIRTH first. Births and data are QoS 0, not retained; NDEATH is QoS 1.
 *
 * Pure: builds payload objects for the codec and keeps the counters; the MQTT side is in
 * sparkplugNode.ts.
 */
import type { DeviceMetric, MetricValue } from './deviceMetrics.ts';

export const NAMESPACE = 'spBv1.0';
export const REBIRTH_METRIC = 'Node Control/Rebirth';

export interface PayloadMetric {
  name: string;
  type: string;
  value: MetricValue;
}

export interface Frame {
  topic: string;
  payload: { timestamp: number; seq?: number; metrics: PayloadMetric[] };
  qos: 0 | 1;
}

export class SparkplugSession {
  private seq = 0;
  /** Each device's metrics as last sent (by DBIRTH or DDATA). */
  private readonly sent = new Map<string, Map<string, MetricValue>>();

  constructor(
    readonly groupId: string,
    readonly edgeNodeId: string,
    /** The bdSeq of the current connection (0..255). */
    public bdSeq: number,
    private readonly nodeMetrics: readonly DeviceMetric[] = [],
  ) {}

  nodeTopic(type: 'NBIRTH' | 'NDEATH' | 'NDATA' | 'NCMD'): string {
    return `${NAMESPACE}/${this.groupId}/${type}/${this.edgeNodeId}`;
  }

  deviceTopic(type: 'DBIRTH' | 'DDEATH' | 'DDATA' | 'DCMD', device: string): string {
    return `${NAMESPACE}/${this.groupId}/${type}/${this.edgeNodeId}/${device}`;
  }

  /** The death certificate for the will of a connection with this bdSeq. */
  ndeath(nowMs: number): Frame {
    return { topic: this.nodeTopic('NDEATH'), qos: 1, payload: { timestamp: nowMs, metrics: [bdSeqMetric(this.bdSeq)] } };
  }

  /** Birth of the node: seq starts again at 0 and every device must be born again. */
  nbirth(nowMs: number): Frame {
    this.seq = 0;
    this.sent.clear();
    const metrics: PayloadMetric[] = [bdSeqMetric(this.bdSeq), { name: REBIRTH_METRIC, type: 'Boolean', value: false }, ...this.nodeMetrics];
    return { topic: this.nodeTopic('NBIRTH'), qos: 0, payload: { timestamp: nowMs, seq: this.nextSeq(true), metrics } };
  }

  /**
   * What to send for a device's current metrics: a DBIRTH when it was not born since the last
   * NBIRTH or reports a metric its birth did not list, else a DDATA of the changed metrics, else
   * nothing.
   */
  update(device: string, metrics: readonly DeviceMetric[], nowMs: number): Frame | null {
    const last = this.sent.get(device);
    const born = last !== undefined && metrics.every((m) => last.has(m.name));
    if (!born) {
      this.sent.set(device, new Map(metrics.map((m) => [m.name, m.value])));
      return { topic: this.deviceTopic('DBIRTH', device), qos: 0, payload: { timestamp: nowMs, seq: this.nextSeq(), metrics: metrics.map(copy) } };
    }
    const changed = metrics.filter((m) => !Object.is(last.get(m.name), m.value));
    if (changed.length === 0) return null;
    for (const m of changed) last.set(m.name, m.value);
    return { topic: this.deviceTopic('DDATA', device), qos: 0, payload: { timestamp: nowMs, seq: this.nextSeq(), metrics: changed.map(copy) } };
  }

  /** A device that is gone (removed from the map): DDEATH, and it is born again if it returns. */
  deviceDeath(device: string, nowMs: number): Frame | null {
    if (!this.sent.delete(device)) return null;
    return { topic: this.deviceTopic('DDEATH', device), qos: 0, payload: { timestamp: nowMs, seq: this.nextSeq(), metrics: [] } };
  }

  /** The devices born since the last NBIRTH. */
  get devices(): string[] {
    return [...this.sent.keys()];
  }

  private nextSeq(reset = false): number {
    if (reset) this.seq = 0;
    const s = this.seq;
    this.seq = (this.seq + 1) % 256;
    return s;
  }
}

function bdSeqMetric(bdSeq: number): PayloadMetric {
  return { name: 'bdSeq', type: 'Int64', value: bdSeq };
}

function copy(m: DeviceMetric): PayloadMetric {
  return { name: m.name, type: m.type, value: m.value };
}
