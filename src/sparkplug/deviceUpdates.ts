/**
 * The stream the Sparkplug output is built on: every asset's state message from the agent's
 * observe() hook, at most one per device per `minIntervalMs` of wall time (the first at once,
 * then the latest of each interval), until `stop$` fires. With RxJS: observe() becomes an
 * Observable whose teardown removes the listener, groupBy splits it by device and throttleTime
 * keeps each device's pace; the scheduler is a parameter so tests run it on virtual time.
 */
import { filter, fromEventPattern, groupBy, map, mergeMap, takeUntil, throttleTime, type Observable, type SchedulerLike } from 'rxjs';
import type { StateMessage } from '../advisory/messages.ts';
import type { Outbound } from '../agent/outbound.ts';

export type ObserveHook = (listener: (asset: string, message: Outbound) => void) => () => void;

export interface DeviceState {
  asset: string;
  state: StateMessage;
}

/** The agent's observe() hook as an Observable of [asset, message]. */
export function observed(observe: ObserveHook): Observable<[string, Outbound]> {
  return fromEventPattern<[string, Outbound]>(
    (handler) => observe((asset, message) => handler([asset, message])),
    (_handler, stop: () => void) => stop(),
  );
}

export function deviceUpdates(messages: Observable<[string, Outbound]>, minIntervalMs: number, stop$: Observable<unknown>, scheduler?: SchedulerLike): Observable<DeviceState> {
  return messages.pipe(
    filter(([, m]) => m.kind === 'state'),
    map(([asset, m]) => ({ asset, state: JSON.parse(m.payload) as StateMessage })),
    groupBy((u) => u.asset),
    mergeMap((perDevice) => (minIntervalMs > 0 ? perDevice.pipe(throttleTime(minIntervalMs, scheduler, { leading: true, trailing: true })) : perDevice)),
    takeUntil(stop$),
  );
}
