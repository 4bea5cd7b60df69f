/**
 * The `transients:` block of an asset: when a speed change counts as a run-up or coast-down
 * worth recording, and when a measured band differs enough from the map's to say so. One row
 * per key (name, field, bounds); every key is optional.
 */
import { DEFAULT_TRANSIENT_SETTINGS, type TransientSettings } from '../transients/transientSettings.ts';
import { keysOf, ruleOf, TRANSIENTS_BLOCK } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';

/** Each key's field; the keys' bounds and descriptions are rows of TRANSIENTS_BLOCK (mapKeys.ts). */
const FIELDS: Readonly<Record<string, keyof TransientSettings>> = {
  min_sweep_pct: 'minSweepPct',
  min_rate_pct_per_s: 'minRatePctPerS',
  hold_s: 'holdS',
  max_sweep_s: 'maxSweepS',
  drift_fn_pct: 'driftFnPct',
  drift_q_pct: 'driftQPct',
  keep: 'keep',
};

export const TRANSIENT_KEYS: readonly string[] = keysOf(TRANSIENTS_BLOCK);

export function readTransients(reader: Reader, asset: MapView): TransientSettings | undefined {
  const view = reader.map(asset.get('transients') ?? null, asset.child('transients'), TRANSIENT_KEYS, asset.keyOffset('transients'));
  if (!view) return undefined;
  const settings: TransientSettings = { ...DEFAULT_TRANSIENT_SETTINGS };
  let ok = true;
  for (const key of TRANSIENT_KEYS) {
    const field = FIELDS[key];
    const value = view.number(key, ruleOf(TRANSIENTS_BLOCK, key), DEFAULT_TRANSIENT_SETTINGS[field]);
    if (value === undefined) ok = false;
    else settings[field] = value;
  }
  return ok ? settings : undefined;
}
