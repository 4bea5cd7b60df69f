/**
 * Crossings of an asset: every (order, component) pair where the component can be excited by
 * the order, with the shaft speed at which the order meets fn and the speeds it spends inside the
 * component's half-power band.
 *
 *   crossing speed (rpm) = fn * 60 / multiple
 *   speed band (rpm)     = [lo, hi] * 60 / multiple
 * The amplification factor is taken as Q (the half-power estimate), and the required separation
 * margin is read on the side of the operating range the crossing lies on.
 */
import type { AssetConfig } from '../config/types.ts';
import {
  actualSeparationMargin,
  requiredSeparationMarginPct,
  type CrossingPosition,
} from './separationMargin.ts';

export type CrossingVerdict = 'inside-range' | 'margin-short' | 'margin-ok' | 'no-margin-needed';

export interface Crossing {
  orderId: string;
  componentId: string;
  multiple: number;
  fnHz: number;
  speedRpm: number;
  speedBandRpm: [number, number];
  position: CrossingPosition;
  /** True when any part of the speed band lies inside the operating range. */
  bandOverlapsRange: boolean;
  af: number;
  /** Required separation margin in percent (0 when AF < 2.5 or the crossing is inside the range). */
  requiredMarginPct: number;
  /** Actual margin in percent; negative when the crossing is inside the range. */
  actualMarginPct: number;
  verdict: CrossingVerdict;
}

export function crossingOf(
  orderId: string,
  multiple: number,
  componentId: string,
  fnHz: number,
  bandHz: readonly [number, number],
  q: number,
  rangeRpm: readonly [number, number],
): Crossing {
  const speedRpm = (fnHz * 60) / multiple;
  const speedBandRpm: [number, number] = [(bandHz[0] * 60) / multiple, (bandHz[1] * 60) / multiple];
  const { position, marginPct } = actualSeparationMargin(speedRpm, rangeRpm);
  const requiredMarginPct = position === 'inside' ? 0 : requiredSeparationMarginPct(q, position);
  let verdict: CrossingVerdict;
  if (position === 'inside') verdict = 'inside-range';
  else if (requiredMarginPct === 0) verdict = 'no-margin-needed';
  else verdict = marginPct >= requiredMarginPct ? 'margin-ok' : 'margin-short';
  return {
    orderId,
    componentId,
    multiple,
    fnHz,
    speedRpm,
    speedBandRpm,
    position,
    bandOverlapsRange: speedBandRpm[1] >= rangeRpm[0] && speedBandRpm[0] <= rangeRpm[1],
    af: q,
    requiredMarginPct,
    actualMarginPct: marginPct,
    verdict,
  };
}

/** All crossings of an asset, component by component, in the order the map lists them. */
export function assetCrossings(asset: AssetConfig): Crossing[] {
  const out: Crossing[] = [];
  for (const component of asset.components) {
    for (const order of asset.orders) {
      if (!component.orderIds.includes(order.id)) continue;
      out.push(
        crossingOf(order.id, order.multiple, component.id, component.fnHz, component.bandHz, component.q, asset.speed.rangeRpm),
      );
    }
  }
  return out;
}
