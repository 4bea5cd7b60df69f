/**
 * One asset inside the live agent: decodes what arrives on its topics, keeps each input stream
 * in order, drives the asset's engine on event time, applies operator commands, and says what
 * to publish. It never touches the network: the agent hands it payloads with the wall-clock
 * time of arrival and publishes what it returns, so tests drive it directly.
 *
 * Wall-clock time is used only where the question is about the wall: is a block stamped in the
 * future, how old is the data (freshness), has a reorder buffer waited too long. Every alarm
 * decision stays on the samples' own timestamps.
 */
import { alarmMessage, lifecycleMessage, stateMessage, type LifecycleMessage } from '../advisory/messages.ts';
import type { EngineRecord } from '../advisory/records.ts';
import { BlockSequencer, SEQUENCER_COUNT_NAMES } from '../acquisition/blockSequencer.ts';
import { decodeSampleBlock, type DecodeLimits } from '../acquisition/samplePayload.ts';
import { SamplePool } from '../acquisition/samplePool.ts';
import { MAX_SAMPLE_ABS } from '../acquisition/recordingLimits.ts';
import { decodeSpeedRecord } from '../acquisition/speedPayload.ts';
import type { AgentConfig, AssetConfig } from '../config/types.ts';
import { OperatorActions, type OperatorMark } from '../detection/operatorActions.ts';
import { AssetEngine, type EngineSnapshot } from '../engine/assetEngine.ts';
import type { RealFft } from '../manipulation/realFft.ts';
import { parseOperatorCommand } from './operatorCommand.ts';
import { assetTopics, inputTopics, type AssetTopics } from './topics.ts';
import type { Outbound } from './outbound.ts';
import { TransientLearning } from './transientLearning.ts';

export type { Outbound } from './outbound.ts';

export interface DropNote {
  topic: string;
  reason: string;
  detail: string;
}

export interface RuntimeResult {
  out: Outbound[];
  drops: DropNote[];
}

/** Everything the runtime needs to carry on after a restart or a reload. */
export interface RuntimeSnapshot {
  engine: EngineSnapshot;
  operator: Array<[string, OperatorMark]>;
}

interface InputStream {
  channel: number;
  role: 'sensor' | 'tach';
  id: string;
  sequencer: BlockSequencer;
  /** Wall time (ms) the oldest block now held in the reorder buffer has waited since. */
  heldSinceMs: number | null;
}

/** The state message's counter key of each sequencer count ("seq_" + its name). */
const SEQ_COUNTER_KEYS = SEQUENCER_COUNT_NAMES.map((name) => `seq_${name}`);

export class AssetRuntime {
  readonly asset: AssetConfig;
  readonly topics: AssetTopics;
  private readonly agent: AgentConfig;
  private readonly engine: AssetEngine;
  private readonly operator = new OperatorActions();
  private readonly inputs = new Map<string, InputStream>();
  /** Decoded blocks' sample arrays, given back once the engine has consumed each block. */
  private readonly samplePool = new SamplePool();
  private readonly counters: Record<string, number> = {};
  /** The decoder's limits, made once (not an object per block). */
  private readonly decodeLimits: DecodeLimits;
  /** Transients kept and the bands identified from them. */
  readonly learning: TransientLearning;
  private lastDataWallMs: number | null = null;
  private lastStateWallMs: number | null = null;

  constructor(asset: AssetConfig, agent: AgentConfig, topicPrefix: string, fft: RealFft) {
    this.asset = asset;
    this.agent = agent;
    this.topics = assetTopics(asset, topicPrefix);
    this.engine = new AssetEngine(asset, { fft }, { statusEveryS: agent.stateEveryS });
    this.learning = new TransientLearning(asset, this.topics);
    this.decodeLimits = { maxSamples: agent.maxSamplesPerBlock, maxAbs: MAX_SAMPLE_ABS, samples: this.samplePool.take };
    for (const [topic, input] of this.topics.samples) {
      this.inputs.set(topic, { ...input, sequencer: new BlockSequencer({ reorderWindow: agent.reorderWindow }), heldSinceMs: null });
    }
  }

  /** Topics to subscribe to. */
  subscriptions(): string[] {
    return inputTopics(this.topics);
  }

  /** Route one message by topic. */
  onMessage(topic: string, payload: Uint8Array, nowMs: number): RuntimeResult {
    if (topic === this.topics.command) return this.onCommand(payload, nowMs);
    if (topic === this.topics.speed) return this.onSpeed(payload, nowMs);
    return this.onSamples(topic, payload, nowMs);
  }

  onSamples(topic: string, payload: Uint8Array, nowMs: number): RuntimeResult {
    const result: RuntimeResult = { out: [], drops: [] };
    const input = this.inputs.get(topic);
    if (!input) return result;
    this.count('blocks_received');
    const decoded = decodeSampleBlock(payload, this.decodeLimits);
    if (!decoded.ok) return this.drop(result, topic, decoded.reason, decoded.detail);
    const block = decoded.block;
    if (block.tS > nowMs / 1000 + this.agent.maxFutureS) {
      return this.drop(result, topic, 'time_future', `block seq ${block.seq} stamped ${(block.tS - nowMs / 1000).toFixed(1)} s ahead of this agent's clock (limit ${this.agent.maxFutureS} s)`);
    }
    if (block.tS < nowMs / 1000 - this.agent.maxPastS) {
      return this.drop(result, topic, 'time_past', `block seq ${block.seq} stamped ${(nowMs / 1000 - block.tS).toFixed(0)} s behind this agent's clock (limit ${this.agent.maxPastS} s)`);
    }
    this.lastDataWallMs = nowMs;
    const seq = input.sequencer.accept(block);
    for (const d of seq.dropped) this.drop(result, topic, d.reason, `block seq ${d.seq}`);
    input.heldSinceMs = input.sequencer.heldCount > 0 ? (input.heldSinceMs ?? nowMs) : null;
    // Most blocks deliver one block and produce no record: no array is built for them.
    let records: EngineRecord[] | null = null;
    for (const d of seq.deliver) {
      if (d.resetBefore) {
        this.count(`reset_${d.reason ?? 'gap'}`);
        result.drops.push({ topic, reason: d.reason ?? 'gap', detail: `history of ${input.role} ${input.id} reset before block seq ${d.block.seq}` });
        this.engine.resetChannel(input.channel);
      }
      const produced = this.engine.pushChannel(input.channel, d.block.tS, d.block.sampleRateHz, d.block.samples);
      if (produced.length > 0) records = records === null ? produced : records.concat(produced);
      this.samplePool.give(d.block.samples);
    }
    if (records !== null) this.publishRecords(records, nowMs, result);
    return result;
  }

  onSpeed(payload: Uint8Array, nowMs: number): RuntimeResult {
    const result: RuntimeResult = { out: [], drops: [] };
    const topic = this.topics.speed as string;
    const decoded = decodeSpeedRecord(payload, this.asset.speed.rangeRpm);
    if (!decoded.ok) return this.drop(result, topic, decoded.reason, decoded.detail);
    if (decoded.tS > nowMs / 1000 + this.agent.maxFutureS) {
      return this.drop(result, topic, 'time_future', `speed record stamped ${(decoded.tS - nowMs / 1000).toFixed(1)} s ahead of this agent's clock`);
    }
    this.count('speed_records');
    const records = this.engine.pushSpeed({ tS: decoded.tS, rpm: decoded.rpm, confidence: 1, source: 'topic' });
    this.publishRecords(records, nowMs, result);
    return result;
  }

  onCommand(payload: Uint8Array, nowMs: number): RuntimeResult {
    const result: RuntimeResult = { out: [], drops: [] };
    const tS = this.engine.decisionTimeS ?? nowMs / 1000;
    const parsed = parseOperatorCommand(payload, this.asset, {
      maxShelveS: this.agent.maxShelveS,
      maxCommandAgeS: this.agent.maxCommandAgeS,
      maxFutureS: this.agent.maxFutureS,
      nowS: nowMs / 1000,
    });
    if (!parsed.ok) {
      this.count('commands_rejected');
      result.out.push({
        topic: this.topics.rejected,
        payload: JSON.stringify({ kind: 'command-rejected', asset: this.asset.id, t_s: tS, reason: parsed.reason, detail: parsed.detail }),
        qos: 1,
        retain: false,
        kind: 'rejected',
      });
      result.drops.push({ topic: this.topics.command, reason: parsed.reason, detail: parsed.detail });
      return result;
    }
    const c = parsed.command;
    const key = OperatorActions.key(c.component, c.order);
    const active = this.isActive(c.component, c.order);
    let message: LifecycleMessage | null = null;
    if (c.action === 'acknowledge') {
      this.operator.acknowledge(key, c.by);
      message = this.lifecycle('acknowledge', c.component, c.order, tS, c.by, active);
    } else if (c.action === 'shelve') {
      this.operator.shelve(key, tS + c.durationS, c.by);
      message = this.lifecycle('shelve', c.component, c.order, tS, c.by, active, tS + c.durationS);
    } else if (this.operator.unshelve(key, c.by)) {
      message = this.lifecycle('unshelve', c.component, c.order, tS, c.by, active, null, 'operator');
    }
    this.count(`commands_${c.action}`);
    if (message) result.out.push(this.lifecycleOut(message));
    result.out.push(this.stateOut(nowMs));
    return result;
  }

  /**
   * Called on a wall-clock timer: re-publishes the state when nothing refreshed it (so a
   * dashboard sees data go stale), and lets go of reorder buffers that have waited too long
   * for a missing block.
   */
  tick(nowMs: number): RuntimeResult {
    const result: RuntimeResult = { out: [], drops: [] };
    const records: EngineRecord[] = [];
    for (const [topic, input] of this.inputs) {
      if (input.heldSinceMs === null || nowMs - input.heldSinceMs < this.agent.staleAfterS * 1000) continue;
      const seq = input.sequencer.flush();
      input.heldSinceMs = null;
      for (const d of seq.deliver) {
        if (d.resetBefore) {
          this.count(`reset_${d.reason ?? 'gap'}`);
          result.drops.push({ topic, reason: d.reason ?? 'gap', detail: `gave up waiting for a missing block before seq ${d.block.seq}` });
          this.engine.resetChannel(input.channel);
        }
        records.push(...this.engine.pushChannel(input.channel, d.block.tS, d.block.sampleRateHz, d.block.samples));
        this.samplePool.give(d.block.samples);
      }
    }
    this.publishRecords(records, nowMs, result);
    if (this.lastStateWallMs === null || nowMs - this.lastStateWallMs >= this.agent.staleAfterS * 1000) {
      result.out.push(this.stateOut(nowMs));
    }
    return result;
  }

  snapshot(): RuntimeSnapshot {
    return { engine: this.engine.snapshot(), operator: this.operator.entries() };
  }

  restore(s: RuntimeSnapshot): { restored: string[]; fresh: string[] } {
    this.operator.restore(s.operator);
    return this.engine.restore(s.engine);
  }

  /** The agent's overload rule (see AssetEngine.shedSpectra). */
  set shedSpectra(on: boolean) {
    this.engine.shedSpectra = on;
  }

  counterValues(): Record<string, number> {
    const all: Record<string, number> = { ...this.counters, overload_shed_blocks: this.engine.shedBlocks, overload_shedding: this.engine.shedSpectra ? 1 : 0 };
    // Summed over the inputs name by name (keys made once, not a string per input and name):
    // the same keys in the same order as the sequencer lists them, none without inputs.
    if (this.inputs.size === 0) return all;
    for (let k = 0; k < SEQUENCER_COUNT_NAMES.length; k++) {
      const name = SEQUENCER_COUNT_NAMES[k];
      let n = 0;
      for (const input of this.inputs.values()) n += input.sequencer.counts[name];
      all[SEQ_COUNTER_KEYS[k]] = n;
    }
    return all;
  }

  private publishRecords(records: EngineRecord[], nowMs: number, result: RuntimeResult): void {
    for (const r of records) {
      if (r.kind === 'status') {
        for (const key of this.operator.expire(r.t_s)) {
          const [component, order] = key.split('/');
          result.out.push(this.lifecycleOut(this.lifecycle('unshelve', component, order, r.t_s, null, this.isActive(component, order), null, 'expired')));
        }
        result.out.push(this.stateOut(nowMs, r));
        continue;
      }
      if (r.kind === 'transient') {
        for (const o of this.learning.onTransient(r)) result.out.push(o);
        continue;
      }
      const key = OperatorActions.key(r.component, r.order);
      this.operator.onAlarmEvent(key, r.event);
      if (this.operator.isShelved(key, r.t_s)) {
        this.count('alarm_events_shelved');
        continue;
      }
      const message = alarmMessage(r, this.operator.mark(key));
      this.count(`alarm_${r.event}`);
      result.out.push({ topic: this.topics.alarm, payload: JSON.stringify(message), qos: 1, retain: false, kind: 'alarm', id: message.id });
    }
  }

  private stateOut(nowMs: number, status = this.engine.status()): Outbound {
    this.lastStateWallMs = nowMs;
    const ageS = this.lastDataWallMs === null ? null : (nowMs - this.lastDataWallMs) / 1000;
    const message = stateMessage(
      status,
      (key) => this.operator.mark(key),
      { data_age_s: ageS, stale: ageS === null || ageS > this.agent.staleAfterS },
      this.counterValues(),
    );
    return { topic: this.topics.state, payload: JSON.stringify(message), qos: 1, retain: true, kind: 'state' };
  }

  private lifecycle(
    event: LifecycleMessage['event'],
    component: string,
    order: string,
    tS: number,
    by: string | null,
    active: boolean,
    shelvedUntilS: number | null = null,
    cause: LifecycleMessage['cause'] = null,
  ): LifecycleMessage {
    const entry = this.engine.status(tS).active.find((a) => a.component === component && a.order === order);
    return lifecycleMessage({
      event,
      asset: this.asset.id,
      component,
      order,
      tS,
      by,
      shelvedUntilS,
      cause,
      active,
      priority: entry?.priority ?? null,
      procedure: this.asset.procedure,
    });
  }

  private lifecycleOut(m: LifecycleMessage): Outbound {
    this.count(`lifecycle_${m.event}`);
    return { topic: this.topics.alarm, payload: JSON.stringify(m), qos: 1, retain: false, kind: 'lifecycle', id: m.id };
  }

  private isActive(component: string, order: string): boolean {
    return this.engine.status().active.some((a) => a.component === component && a.order === order);
  }

  private drop(result: RuntimeResult, topic: string, reason: string, detail: string): RuntimeResult {
    this.count(`drop_${reason}`);
    result.drops.push({ topic, reason, detail });
    return result;
  }

  private count(name: string): void {
    this.counters[name] = (this.counters[name] ?? 0) + 1;
  }
}
