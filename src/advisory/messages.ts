/**
 * Messages the live agent publishes, built from engine records: alarm events with a unique id
 * and ISO time, operator lifecycle events, and the retained state of an asset.
 *
 * Ids are derived from the content (asset, component, order, event, event time, escalation
 * step), so the same event always gets the same id: re-published after an outage or a
 * restart, a consumer can drop the duplicate by id.
 */
import { createHash } from 'node:crypto';
import type { Priority } from '../config/types.ts';
import type { OperatorMark } from '../detection/operatorActions.ts';
import { ADVISORY_NOTICE, type AlarmRecord, type StatusRecord } from './records.ts';

export interface AlarmMessage extends AlarmRecord {
  id: string;
  /** ISO 8601 UTC of t_s (t_s is epoch seconds in the live agent). */
  time: string;
  acknowledged: boolean;
}

export interface LifecycleMessage {
  kind: 'alarm';
  event: 'acknowledge' | 'shelve' | 'unshelve';
  id: string;
  asset: string;
  component: string;
  order: string;
  t_s: number;
  time: string;
  by: string | null;
  /** shelve: when the shelf ends (ISO) and its length; unshelve: 'operator' or 'expired'. */
  shelved_until: string | null;
  duration_s: number | null;
  cause: 'operator' | 'expired' | null;
  /** Whether the pair's alarm is active at this moment. */
  active: boolean;
  priority: Priority | null;
  procedure: string;
  advice: string;
}

export interface StateMessage extends Omit<StatusRecord, 'kind' | 'active'> {
  kind: 'state';
  time: string;
  active: Array<StatusRecord['active'][number] & { acknowledged: boolean; shelved_until: string | null }>;
  freshness: { data_age_s: number | null; stale: boolean };
  counters: Record<string, number>;
}

export function isoTime(epochS: number): string {
  return Number.isFinite(epochS) ? new Date(Math.round(epochS * 1000)).toISOString() : '';
}

export function eventId(parts: ReadonlyArray<string | number>): string {
  return createHash('sha256').update(JSON.stringify(parts)).digest('hex').slice(0, 24);
}

export function alarmMessage(r: AlarmRecord, mark: OperatorMark): AlarmMessage {
  return {
    ...r,
    id: eventId([r.asset, r.component, r.order, r.event, r.t_s, r.escalation]),
    time: isoTime(r.t_s),
    acknowledged: r.event === 'raise' ? false : mark.acknowledged,
  };
}

export function lifecycleMessage(args: {
  event: LifecycleMessage['event'];
  asset: string;
  component: string;
  order: string;
  tS: number;
  by: string | null;
  shelvedUntilS?: number | null;
  cause?: LifecycleMessage['cause'];
  active: boolean;
  priority: Priority | null;
  procedure: string;
}): LifecycleMessage {
  const { event, asset, component, order, tS, by, active, priority, procedure } = args;
  const until = args.shelvedUntilS ?? null;
  const what =
    event === 'acknowledge'
      ? `Acknowledged by ${by ?? 'an operator'}.`
      : event === 'shelve'
        ? `Shelved by ${by ?? 'an operator'} until ${isoTime(until ?? tS)}: alarm events for ${component} / ${order} are held back meanwhile; exposure is still counted.`
        : `Shelving of ${component} / ${order} ended (${args.cause ?? 'operator'}).`;
  return {
    kind: 'alarm',
    event,
    id: eventId([asset, component, order, event, tS, by ?? '', until ?? '']),
    asset,
    component,
    order,
    t_s: tS,
    time: isoTime(tS),
    by,
    shelved_until: until === null ? null : isoTime(until),
    duration_s: until === null ? null : until - tS,
    cause: args.cause ?? null,
    active,
    priority,
    procedure,
    advice: `${what} Refer to: ${procedure}. ${ADVISORY_NOTICE}`,
  };
}

export function stateMessage(
  status: StatusRecord,
  marks: (key: string) => OperatorMark,
  freshness: StateMessage['freshness'],
  counters: Record<string, number>,
): StateMessage {
  const { kind: _kind, active, ...rest } = status;
  return {
    kind: 'state',
    ...rest,
    time: isoTime(status.t_s),
    active: active.map((a) => {
      const m = marks(`${a.component}/${a.order}`);
      return { ...a, acknowledged: m.acknowledged, shelved_until: m.shelvedUntilS === null ? null : isoTime(m.shelvedUntilS) };
    }),
    freshness,
    counters,
  };
}
