/**
 * What one asset (a Sparkplug device) reports, read from the agent's state message: speed, each
 * order's separation from its nearest band, the active alarms' count and highest priority, each
 * component's exposure, and the data's age. Metric names are qband's own, with '/' grouping them
 * as Sparkplug hosts show folders.
 */
import type { StateMessage } from '../advisory/messages.ts';
import { PRIORITIES, type Priority } from '../config/types.ts';

export type MetricType = 'Double' | 'UInt32' | 'String' | 'Boolean';
export type MetricValue = number | string | boolean | null;

export interface DeviceMetric {
  name: string;
  type: MetricType;
  value: MetricValue;
}

export function deviceMetrics(state: StateMessage): DeviceMetric[] {
  const out: DeviceMetric[] = [
    { name: 'speed_rpm', type: 'Double', value: finite(state.speed_rpm) },
    { name: 'speed_state', type: 'String', value: state.speed_state },
  ];
  for (const o of state.orders) {
    out.push({ name: `orders/${o.order}/separation_pct`, type: 'Double', value: finite(o.separation_pct) });
    out.push({ name: `orders/${o.order}/nearest_component`, type: 'String', value: o.nearest_component ?? '' });
  }
  out.push({ name: 'alarms/active_count', type: 'UInt32', value: state.active.length });
  out.push({ name: 'alarms/highest_priority', type: 'String', value: highestPriority(state.active.map((a) => a.priority)) ?? 'none' });
  for (const e of state.exposure) {
    out.push({ name: `components/${e.component}/exposure_s`, type: 'Double', value: finite(e.seconds_in_band) });
    out.push({ name: `components/${e.component}/exposure_cycles`, type: 'Double', value: finite(e.cycles) });
  }
  out.push({ name: 'data_age_s', type: 'Double', value: finite(state.freshness.data_age_s) });
  out.push({ name: 'data_stale', type: 'Boolean', value: state.freshness.stale });
  return out;
}

/** The highest of some alarm priorities (low < medium < high < urgent), or null for none. */
export function highestPriority(priorities: readonly Priority[]): Priority | null {
  let best = -1;
  for (const p of priorities) best = Math.max(best, PRIORITIES.indexOf(p));
  return best < 0 ? null : PRIORITIES[best];
}

function finite(x: number | null): number | null {
  return x !== null && Number.isFinite(x) ? x : null;
}
