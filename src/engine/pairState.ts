/**
 * What the engine keeps for each (component, order) pair where the order can excite the
 * component: its band in speed terms, its dwell alarm and the evidence gathered for it.
 */
import type { OutsideBandReference } from '../advisory/records.ts';
import type { AssetConfig, ComponentConfig, OrderConfig } from '../config/types.ts';
import { deadbandHz, type BandPosition } from '../detection/bandPosition.ts';
import { DwellAlarm } from '../detection/dwellAlarm.ts';

export interface PairState {
  component: ComponentConfig;
  order: OrderConfig;
  orderIndex: number;
  deadbandHz: number;
  speedBandRpm: [number, number];
  alarm: DwellAlarm;
  cyclesInDwell: number;
  outside: OutsideBandReference | null;
  lastPosition: BandPosition;
}

/** Every pair of the asset, components in map order and each component's orders in its order. */
export function buildPairs(asset: AssetConfig): PairState[] {
  const orderIndex = new Map(asset.orders.map((o, i) => [o.id, i]));
  const pairs: PairState[] = [];
  for (const component of asset.components) {
    for (const id of component.orderIds) {
      const i = orderIndex.get(id) as number;
      const order = asset.orders[i];
      pairs.push({
        component,
        order,
        orderIndex: i,
        deadbandHz: deadbandHz(component.fnHz, asset.alarm.deadbandPct),
        speedBandRpm: [(component.bandHz[0] * 60) / order.multiple, (component.bandHz[1] * 60) / order.multiple],
        alarm: new DwellAlarm(asset.alarm),
        cyclesInDwell: 0,
        outside: null,
        lastPosition: 'unknown',
      });
    }
  }
  return pairs;
}

export function pairKey(p: PairState): string {
  return `${p.component.id}/${p.order.id}`;
}
