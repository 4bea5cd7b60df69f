/**
 * What the operator page knows, built only from what the agent says: every message its asset
 * runtimes produce (Agent.observe) and whether the broker connection is up. Per asset: the last
 * state, the alarm events of the pairs now active (their evidence and advice), operator
 * lifecycle events, recent transients, identified bands and refused commands.
 */
import type { AlarmMessage, LifecycleMessage, StateMessage } from '../advisory/messages.ts';
import type { Outbound } from '../agent/outbound.ts';
import type { IdentifiedRecord } from '../identification/identifiedRecord.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';

/** Recent items of each kind kept per asset. */
const KEEP = 5;

export interface AssetView {
  state: StateMessage | null;
  /** Wall time (ms) the last state arrived. */
  stateWallMs: number | null;
  /** Latest raise or escalate per `component/order`, removed on clear. */
  alarms: Map<string, AlarmMessage>;
  /** Latest operator event per `component/order`. */
  lifecycle: Map<string, LifecycleMessage>;
  transients: TransientRecord[];
  identified: Map<string, IdentifiedRecord>;
  rejected: Array<{ t_s: number; reason: string; detail: string }>;
  /** Bumped on every change, so a view knows what to push. */
  version: number;
}

export class SiteModel {
  readonly assets = new Map<string, AssetView>();

  constructor(assetIds: readonly string[]) {
    for (const id of assetIds) this.view(id);
  }

  view(asset: string): AssetView {
    let v = this.assets.get(asset);
    if (!v) {
      v = { state: null, stateWallMs: null, alarms: new Map(), lifecycle: new Map(), transients: [], identified: new Map(), rejected: [], version: 0 };
      this.assets.set(asset, v);
    }
    return v;
  }

  /** Takes one message; returns whether it holds an alarm event (pushed at once). */
  onMessage(asset: string, message: Outbound, nowMs: number): boolean {
    const v = this.view(asset);
    let body: unknown;
    try {
      body = JSON.parse(message.payload);
    } catch {
      return false;
    }
    v.version++;
    switch (message.kind) {
      case 'state':
        v.state = body as StateMessage;
        v.stateWallMs = nowMs;
        // The state lists what is active: an alarm no longer listed has cleared.
        for (const key of v.alarms.keys()) if (!v.state.active.some((a) => `${a.component}/${a.order}` === key)) v.alarms.delete(key);
        return false;
      case 'alarm': {
        const m = body as AlarmMessage;
        const key = `${m.component}/${m.order}`;
        if (m.event === 'clear') v.alarms.delete(key);
        else v.alarms.set(key, m);
        return true;
      }
      case 'lifecycle': {
        const m = body as LifecycleMessage;
        const key = `${m.component}/${m.order}`;
        v.lifecycle.set(key, m);
        const alarm = v.alarms.get(key);
        if (alarm && m.event === 'acknowledge') alarm.acknowledged = true;
        return true;
      }
      case 'transient':
        v.transients = [...v.transients, body as TransientRecord].slice(-KEEP);
        return false;
      case 'identified': {
        const r = body as IdentifiedRecord;
        v.identified.set(`${r.component}/${r.order}`, r);
        return false;
      }
      case 'rejected': {
        const r = body as { t_s: number; reason: string; detail: string };
        v.rejected = [...v.rejected, { t_s: r.t_s, reason: r.reason, detail: r.detail }].slice(-KEEP);
        return false;
      }
      default:
        return false;
    }
  }

  /** Seconds since the agent last said anything about the asset's state (wall time), or null. */
  silenceS(asset: string, nowMs: number): number | null {
    const v = this.assets.get(asset);
    return v?.stateWallMs == null ? null : (nowMs - v.stateWallMs) / 1000;
  }
}
