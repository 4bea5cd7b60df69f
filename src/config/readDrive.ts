/**
 * The `drive:` block of an asset (optional): how the variable-speed drive relates its output
 * frequency to shaft speed, where the machine normally runs, and how `qband plan` widens the
 * crossings' speed bands into skip bands. Either the motor (poles, slip) or a direct factor.
 */
import { DRIVE_BLOCK, keysOf, ruleOf } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import type { DriveConfig } from './types.ts';

const DRIVE_KEYS = keysOf(DRIVE_BLOCK);
const rule = (key: string) => ruleOf(DRIVE_BLOCK, key);

/** Default share of the operating range that skip bands may take before plan warns, percent usable. */
export const DEFAULT_MIN_USABLE_PCT = 50;

export function readDrive(reader: Reader, asset: MapView): DriveConfig | undefined {
  const view = reader.map(asset.get('drive') ?? null, asset.child('drive'), DRIVE_KEYS, asset.keyOffset('drive'));
  if (!view) return undefined;
  const poles = view.optionalNumber('motor_poles', rule('motor_poles'));
  const slipPct = view.optionalNumber('slip_pct', rule('slip_pct'));
  const direct = view.optionalNumber('hz_per_rpm', rule('hz_per_rpm'));
  const normalRpm = view.optionalNumber('normal_rpm', rule('normal_rpm'));
  const skipMarginPct = view.optionalNumber('skip_margin_pct', rule('skip_margin_pct'));
  const speedUncertaintyPct = view.optionalNumber('speed_uncertainty_pct', rule('speed_uncertainty_pct'));
  const minUsablePct = view.number('min_usable_pct', rule('min_usable_pct'), DEFAULT_MIN_USABLE_PCT);
  let ok = true;
  for (const [key, value] of [['motor_poles', poles], ['slip_pct', slipPct], ['hz_per_rpm', direct], ['normal_rpm', normalRpm], ['skip_margin_pct', skipMarginPct], ['speed_uncertainty_pct', speedUncertaintyPct]] as const) {
    if (view.has(key) && value === undefined) ok = false;
  }
  if (poles !== undefined && poles % 2 !== 0) {
    reader.log.error({ code: 'QB_E_CONFIG_RANGE', path: view.child('motor_poles'), offset: view.valueOffset('motor_poles'), expected: 'an even number of poles', found: String(poles) });
    ok = false;
  }
  if (view.has('hz_per_rpm') && (view.has('motor_poles') || view.has('slip_pct'))) {
    reader.log.error({
      code: 'QB_E_CONFIG_CONFLICT',
      path: view.child('hz_per_rpm'),
      offset: view.keyOffset('hz_per_rpm'),
      expected: 'either hz_per_rpm or motor_poles (with slip_pct), not both',
      found: "'hz_per_rpm' and 'motor_poles'/'slip_pct'",
      detail: 'conflicts with motor_poles/slip_pct: give the direct factor or the motor, not both',
    });
    ok = false;
  }
  if (view.has('slip_pct') && !view.has('motor_poles')) {
    view.notApplicable('slip_pct', "'slip_pct' goes with 'motor_poles'");
    ok = false;
  }
  if (!ok || minUsablePct === undefined) return undefined;
  const drive: DriveConfig = { minUsablePct };
  if (poles !== undefined) drive.motor = { poles, slipPct: slipPct ?? 0 };
  if (direct !== undefined) drive.hzPerRpm = direct;
  if (normalRpm !== undefined) drive.normalRpm = normalRpm;
  if (skipMarginPct !== undefined) drive.skipMarginPct = skipMarginPct;
  if (speedUncertaintyPct !== undefined) drive.speedUncertaintyPct = speedUncertaintyPct;
  return drive;
}
