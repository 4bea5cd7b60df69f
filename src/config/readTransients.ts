/**
 * The `transients:` block of an asset: when a speed change counts as a run-up or coast-down
 * worth recording, and when a measured band differs enough from the map's to say so. One row
 * per key (name, field, bounds); every key is optional.
 */
import { DEFAULT_TRANSIENT_SETTINGS, type TransientSettings } from '../transients/transientSettings.ts';
import type { MapView, NumberRule, Reader } from './mapView.ts';

const FIELDS: ReadonlyArray<{ key: string; field: keyof TransientSettings; rule: NumberRule }> = [
  { key: 'min_sweep_pct', field: 'minSweepPct', rule: { gt: 0, le: 100 } },
  { key: 'min_rate_pct_per_s', field: 'minRatePctPerS', rule: { gt: 0, le: 100 } },
  { key: 'hold_s', field: 'holdS', rule: { gt: 0, le: 600 } },
  // Order tracks of a sweep are kept in memory until it ends: an hour bounds them.
  { key: 'max_sweep_s', field: 'maxSweepS', rule: { ge: 10, le: 3600 } },
  { key: 'drift_fn_pct', field: 'driftFnPct', rule: { gt: 0, le: 50 } },
  { key: 'drift_q_pct', field: 'driftQPct', rule: { gt: 0, le: 500 } },
  { key: 'keep', field: 'keep', rule: { integer: true, ge: 1, le: 100 } },
];

export const TRANSIENT_KEYS: readonly string[] = FIELDS.map((f) => f.key);

export function readTransients(reader: Reader, asset: MapView): TransientSettings | undefined {
  const view = reader.map(asset.get('transients') ?? null, asset.child('transients'), TRANSIENT_KEYS, asset.keyOffset('transients'));
  if (!view) return undefined;
  const settings: TransientSettings = { ...DEFAULT_TRANSIENT_SETTINGS };
  let ok = true;
  for (const { key, field, rule } of FIELDS) {
    const value = view.number(key, rule, DEFAULT_TRANSIENT_SETTINGS[field]);
    if (value === undefined) ok = false;
    else settings[field] = value;
  }
  return ok ? settings : undefined;
}
