/**
 * The plan of one asset: its crossings, the skip bands the drive should be given (in rpm and,
 * when the map describes the drive, in drive output frequency), how much of the operating range
 * they leave usable, and the warnings a drive technician and the site's engineers need. Used by
 * `qband plan` and the operator page alike.
 */
import type { AssetConfig, SpeedSource } from '../config/types.ts';
import { assetCrossings, type Crossing } from './crossings.ts';
import { motorHzPerRpm, skipBands, usableRangePct, type SkipBand } from './skipBands.ts';

/**
 * Default uncertainty of the measured speed, percent, by source: a tach counts pulse edges
 * (0.1 %, common practice for a once-per-rev pickup); tachless 1X and speed records from
 * elsewhere are taken at 0.5 %, the tachless path's accuracy on the recordings (docs/engine.md).
 */
export const DEFAULT_SPEED_UNCERTAINTY_PCT: Record<SpeedSource, number> = { tach: 0.1, spectrum: 0.5, topic: 0.5 };

export type PlanWarningCode = 'QB_E_PLAN_RANGE_USABLE' | 'QB_E_PLAN_NORMAL_SKIPPED';

export interface PlanWarning {
  code: PlanWarningCode;
  message: string;
}

export interface AssetPlan {
  asset: AssetConfig;
  crossings: Crossing[];
  marginPct: number;
  /** Where the margin comes from, in words. */
  marginBasis: string;
  skipBands: SkipBand[];
  /** Drive output Hz per shaft rpm, or null when the map does not describe the drive. */
  hzPerRpm: number | null;
  usablePct: number;
  warnings: PlanWarning[];
}

export function assetPlan(asset: AssetConfig): AssetPlan {
  const drive = asset.drive;
  const uncertainty = drive?.speedUncertaintyPct ?? DEFAULT_SPEED_UNCERTAINTY_PCT[asset.speed.source];
  const marginPct = drive?.skipMarginPct ?? asset.alarm.deadbandPct + uncertainty;
  const marginBasis =
    drive?.skipMarginPct !== undefined
      ? `drive.skip_margin_pct ${marginPct} % of each crossing speed on each side`
      : `alarm deadband ${asset.alarm.deadbandPct} % + speed uncertainty ${uncertainty} % (${drive?.speedUncertaintyPct !== undefined ? 'drive.speed_uncertainty_pct' : `default for speed source ${asset.speed.source}`}) = ${round(marginPct)} % of each crossing speed on each side`;
  const crossings = assetCrossings(asset);
  const bands = skipBands(
    crossings.map((c) => ({ orderId: c.orderId, componentId: c.componentId, crossingRpm: c.speedRpm, speedBandRpm: c.speedBandRpm })),
    marginPct,
    asset.speed.rangeRpm,
  );
  const hzPerRpm = drive?.hzPerRpm ?? (drive?.motor ? motorHzPerRpm(drive.motor.poles, drive.motor.slipPct) : null);
  const usablePct = usableRangePct(bands, asset.speed.rangeRpm);
  const warnings: PlanWarning[] = [];
  const minUsable = drive?.minUsablePct ?? 50;
  if (usablePct < minUsable) {
    warnings.push({
      code: 'QB_E_PLAN_RANGE_USABLE',
      message: `${asset.id}: skip bands leave ${round(usablePct)} % of the operating range ${asset.speed.rangeRpm[0]}-${asset.speed.rangeRpm[1]} rpm usable, less than ${minUsable} % (drive.min_usable_pct): the process may not be controllable; the bands themselves (fn, damping) may need moving`,
    });
  }
  const normal = drive?.normalRpm;
  const hit = normal === undefined ? undefined : bands.find((b) => normal >= b.loRpm && normal <= b.hiRpm);
  if (normal !== undefined && hit) {
    warnings.push({
      code: 'QB_E_PLAN_NORMAL_SKIPPED',
      message: `${asset.id}: the normal operating point ${normal} rpm lies inside the skip band ${round(hit.loRpm)}-${round(hit.hiRpm)} rpm (${hit.crossings.join(', ')}): the machine cannot run there without dwelling in a resonance`,
    });
  }
  return { asset, crossings, marginPct, marginBasis, skipBands: bands, hzPerRpm, usablePct, warnings };
}

/** A skip band in drive output frequency, to 0.1 Hz rounded outward so the band entered covers it; null without a drive. */
export function skipBandDriveHz(plan: AssetPlan, band: SkipBand): [number, number] | null {
  if (plan.hzPerRpm === null) return null;
  return [Math.floor(band.loRpm * plan.hzPerRpm * 10) / 10, Math.ceil(band.hiRpm * plan.hzPerRpm * 10) / 10];
}

function round(v: number): number {
  return Number(v.toFixed(2));
}
