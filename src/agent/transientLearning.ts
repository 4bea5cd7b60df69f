/**
 * What the live agent learns from the machine's own sweeps: each transient record the engine
 * completes is published, kept (the last `keep` of the asset, also in the state directory so
 * a restart loses none), and the bands it swept are identified again from every kept transient
 * together: a band measured on ten run-ups beats one. Identified bands are published with their
 * drift advisory; the map is never edited.
 */
import type { AssetConfig } from '../config/types.ts';
import { identifyComponents } from '../identification/identifyComponents.ts';
import type { IdentifiedRecord } from '../identification/identifiedRecord.ts';
import type { ComponentLines } from '../identification/driftAdvisory.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';
import type { Outbound } from './outbound.ts';
import type { AssetTopics } from './topics.ts';

export class TransientLearning {
  private readonly asset: AssetConfig;
  private readonly topics: AssetTopics;
  private kept: TransientRecord[] = [];
  /** Latest identification per component/order. */
  readonly identified = new Map<string, IdentifiedRecord>();
  /** Where the map writes each component's fn and damping (set by the agent, which has the file). */
  linesOf: ((componentId: string) => ComponentLines | null) | undefined;
  /** Called with the kept transients whenever they change (the agent writes them to its state directory). */
  onKeptChanged: ((kept: TransientRecord[]) => void) | undefined;

  constructor(asset: AssetConfig, topics: AssetTopics) {
    this.asset = asset;
    this.topics = topics;
  }

  get transients(): readonly TransientRecord[] {
    return this.kept;
  }

  /** Transients from before a restart (state directory), oldest first. */
  restore(records: TransientRecord[]): void {
    this.kept = records.filter((r) => r.kind === 'transient' && r.asset === this.asset.id).slice(-this.keep);
  }

  private get keep(): number {
    return this.asset.transients.keep;
  }

  onTransient(record: TransientRecord): Outbound[] {
    const out: Outbound[] = [{ topic: this.topics.transient, payload: JSON.stringify(record), qos: 1, retain: false, kind: 'transient' }];
    this.kept.push(record);
    if (this.kept.length > this.keep) this.kept.splice(0, this.kept.length - this.keep);
    this.onKeptChanged?.(this.kept);
    const outcome = identifyComponents(this.asset, this.kept, { sweptBy: record, linesOf: this.linesOf });
    for (const d of outcome.identified) {
      this.identified.set(`${d.record.component}/${d.record.order}`, d.record);
      out.push({ topic: this.topics.identified, payload: JSON.stringify(d.record), qos: 1, retain: false, kind: 'identified' });
    }
    return out;
  }
}
