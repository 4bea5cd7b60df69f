/**
 * What the agent does with each result of a runtime, wherever the runtime ran: drops logged,
 * alarm and lifecycle events journaled together with the state right after them and flushed
 * before they are published (durable before published), everything else published, and every
 * message handed to the `observe()` listeners. Journaled events stay pending until the PUBACK
 * and go again, in order with their ids, on reconnection or after a restart.
 */
import type { MqttClient } from 'mqtt';
import { persistSnapshots } from './agentJournal.ts';
import { logDrops } from './agentLogs.ts';
import type { RuntimeSnapshot } from './assetRuntime.ts';
import type { Journal, JournalEvent } from './journal.ts';
import { RateLimitedLog, type Logger } from './logger.ts';
import type { Outbound } from './outbound.ts';
import type { AssetTopics } from './topics.ts';
import type { HostResult } from './workers/runtimeHost.ts';

export type Observer = (asset: string, message: Outbound) => void;

export class AgentOutput {
  private readonly observers = new Set<Observer>();
  /** Journal seqs handed to the client and not yet answered (acknowledged or failed). */
  private readonly inFlight = new Set<number>();
  private readonly dropLog = new RateLimitedLog(10_000);
  client: MqttClient | null = null;

  constructor(
    private readonly journal: Journal | null,
    private readonly log: Logger,
    private readonly now: () => number,
    private readonly topicsOf: (asset: string) => AssetTopics | undefined,
  ) {}

  observe(listener: Observer): () => void {
    this.observers.add(listener);
    return () => void this.observers.delete(listener);
  }

  handle(r: HostResult): void {
    const asset = r.asset;
    if (r.failed) {
      // A bug must not take the agent down: say it, keep watching.
      this.log.error({ stage: 'agent', code: 'QB_E_INTERNAL', asset, topic: r.failed.topic, err: r.failed.stack }, r.failed.topic === undefined ? 'tick failed' : 'message handling failed');
      return;
    }
    if (r.drops.length > 0) {
      const topics = this.topicsOf(asset);
      if (topics) logDrops(asset, topics, r.drops, this.dropLog, this.log, this.now());
    }
    if (this.journal && r.persist && r.snapshot) persistSnapshots(this.journal, [{ asset, snapshot: r.snapshot }], this.log);
    if (r.out.length === 0) return; // most sample blocks: nothing to journal, publish or show
    const events = r.out.filter((o) => o.kind === 'alarm' || o.kind === 'lifecycle');
    if (this.journal && events.length > 0) {
      // Durable before published: the events and the state that produced them, in one record.
      const journaled = this.journal.appendEvents(
        asset,
        events.map((o) => ({ id: o.id as string, topic: o.topic, payload: o.payload })),
        r.snapshot as RuntimeSnapshot,
      );
      for (const e of journaled) {
        this.log.info({ stage: 'advisory', code: 'QB_I_ALARM', asset, id: e.id, topic: e.topic }, 'alarm event journaled and published');
        this.publishJournaled(e);
      }
    }
    for (const o of r.out) if (!this.journal || (o.kind !== 'alarm' && o.kind !== 'lifecycle')) this.publish(asset, o);
    if (this.observers.size > 0) for (const o of r.out) for (const f of this.observers) f(asset, o);
  }

  /** Events the broker has not acknowledged (from before an outage or a restart), in order. */
  republishPending(): void {
    const pending = this.journal?.pending().filter((e) => !this.inFlight.has(e.seq)) ?? [];
    if (pending.length === 0) return;
    this.log.info({ stage: 'advisory', code: 'QB_I_REPUBLISH', count: pending.length }, 'publishing alarm events the broker had not acknowledged');
    for (const e of pending) this.publishJournaled(e);
  }

  private publishJournaled(e: JournalEvent): void {
    const client = this.client;
    if (!client?.connected) return; // published on reconnection, from the journal
    this.inFlight.add(e.seq);
    client.publish(e.topic, e.payload, { qos: 1, retain: false }, (err) => {
      this.inFlight.delete(e.seq);
      if (err) {
        this.log.warn({ stage: 'advisory', code: 'QB_E_PUBLISH', id: e.id, topic: e.topic, err: err.message }, 'alarm event not acknowledged; it stays pending');
        return;
      }
      this.journal?.acknowledge([e.seq]);
    });
  }

  private publish(asset: string, o: Outbound): void {
    const client = this.client;
    if (!client || client.disconnecting) return; // a clean stop: only the journal's events are kept
    if (o.kind === 'alarm' || o.kind === 'lifecycle') {
      this.log.info({ stage: 'advisory', code: 'QB_I_ALARM', asset, id: o.id, topic: o.topic }, 'alarm event published');
    }
    client.publish(o.topic, o.payload, { qos: o.qos, retain: o.retain }, (err) => {
      if (err) this.log.error({ stage: 'advisory', code: 'QB_E_PUBLISH', asset, topic: o.topic, id: o.id, err: err.message }, 'publish failed');
    });
  }
}
