/**
 * What operators did to an asset's alarms: acknowledge, shelve, unshelve (alarm-management
 * terms of ISA-18.2), kept per (component, order) pair on event time.
 *
 * - acknowledge: an operator has seen the active alarm. A new raise of the pair makes it
 *   unacknowledged again; a clear forgets the acknowledgement.
 * - shelve: the operator takes the pair's alarm events off the alarm topic for a limited time
 *   (`durationS`, at most the map's max_shelve_s). Shelving ends by unshelve or when event
 *   time passes its end. While shelved, the engine still decides and still counts exposure;
 *   only the publication of alarm events is held back, and the state message shows the shelf.
 */
export interface OperatorMark {
  acknowledged: boolean;
  /** Event time the shelf ends, or null when not shelved. */
  shelvedUntilS: number | null;
  /** Who acted last, as given in the command (free text, for the record). */
  by: string | null;
}

export type OperatorAction = 'acknowledge' | 'shelve' | 'unshelve';

export class OperatorActions {
  private readonly marks = new Map<string, OperatorMark>();

  static key(component: string, order: string): string {
    return `${component}/${order}`;
  }

  mark(key: string): OperatorMark {
    return this.marks.get(key) ?? { acknowledged: false, shelvedUntilS: null, by: null };
  }

  /** True while the pair's alarm events are held back at event time `tS`. */
  isShelved(key: string, tS: number): boolean {
    const until = this.marks.get(key)?.shelvedUntilS;
    return until !== null && until !== undefined && tS < until;
  }

  /** Shelves whose time is up at `tS`: they end now (the caller publishes an unshelve event). */
  expire(tS: number): string[] {
    const ended: string[] = [];
    for (const [key, m] of this.marks) {
      if (m.shelvedUntilS !== null && tS >= m.shelvedUntilS) {
        m.shelvedUntilS = null;
        ended.push(key);
      }
    }
    return ended;
  }

  acknowledge(key: string, by: string | null): void {
    this.marks.set(key, { ...this.mark(key), acknowledged: true, by });
  }

  shelve(key: string, untilS: number, by: string | null): void {
    this.marks.set(key, { ...this.mark(key), shelvedUntilS: untilS, by });
  }

  /** Returns false when the pair was not shelved. */
  unshelve(key: string, by: string | null): boolean {
    const m = this.mark(key);
    if (m.shelvedUntilS === null) return false;
    this.marks.set(key, { ...m, shelvedUntilS: null, by });
    return true;
  }

  /** A raise makes the alarm unacknowledged; a clear forgets the acknowledgement. */
  onAlarmEvent(key: string, event: 'raise' | 'escalate' | 'clear'): void {
    if (event === 'escalate') return;
    const m = this.marks.get(key);
    if (m) m.acknowledged = false;
  }

  entries(): Array<[string, OperatorMark]> {
    return [...this.marks].map(([k, m]) => [k, { ...m }]);
  }

  restore(entries: Array<[string, OperatorMark]>): void {
    this.marks.clear();
    for (const [k, m] of entries) this.marks.set(k, { ...m });
  }
}
