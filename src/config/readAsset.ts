/**
 * One asset of the map: its sensors and orders first (components and the speed source refer to
 * them by id), then speed, components, alarm, analysis, severity and transients.
 */
import type { Node } from 'yaml';
import { ALARM_BLOCK, ASSET_BLOCK, keysOf, ruleOf, SENSOR_BLOCK, SENSOR_UNITS, SEVERITY_BLOCK } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import { checkChannels } from './crossChecks.ts';
import { assignInternalChannels, type SensorDraft } from './internalChannels.ts';
import { DEFAULT_ZONE_BASIS, DEFAULT_ZONE_BOUNDARIES_MM_S } from '../manipulation/velocitySeverity.ts';
import { DEFAULT_ANALYSIS, readAnalysis } from './readAnalysis.ts';
import { readComponent } from './readComponent.ts';
import { readList } from './readList.ts';
import { readOrder } from './readOrder.ts';
import { readSpeed } from './readSpeed.ts';
import { readTransients } from './readTransients.ts';
import { readDrive } from './readDrive.ts';
import { DEFAULT_TRANSIENT_SETTINGS } from '../transients/transientSettings.ts';
import {
  PRIORITIES,
  type AlarmConfig,
  type AssetConfig,
  type ComponentConfig,
  type SensorUnits,
  type SeverityConfig,
} from './types.ts';

// Keys, bounds and descriptions: the blocks of mapKeys.ts.
const ASSET_KEYS = keysOf(ASSET_BLOCK);
const SENSOR_KEYS = keysOf(SENSOR_BLOCK);
const ALARM_KEYS = keysOf(ALARM_BLOCK);
const SEVERITY_KEYS = keysOf(SEVERITY_BLOCK);
const sensorRule = (key: string) => ruleOf(SENSOR_BLOCK, key);
const alarmRule = (key: string) => ruleOf(ALARM_BLOCK, key);

/**
 * (component, order) pairs an asset may watch: each is a dwell state machine stepped at every
 * decision. A machine has a few orders and a few resonances (tens of pairs); thousands is a
 * generated or mistaken map.
 */
export const MAX_PAIRS_PER_ASSET = 4096;

export const DEFAULT_ESCALATE_AFTER_ON_DELAYS = 10;
export const DEFAULT_ESCALATE_GROWTH = 2.0;
export const DEFAULT_SEVERITY: SeverityConfig = {
  zoneBoundariesMmS: [...DEFAULT_ZONE_BOUNDARIES_MM_S],
  basis: DEFAULT_ZONE_BASIS,
};

export function readAsset(reader: Reader, node: Node | null, path: string): { id?: string; item?: AssetConfig } {
  const view = reader.map(node, path, ASSET_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  const description = view.text('description', { fallback: '' });
  const procedure = view.text('procedure', { fallback: '' });
  if (!view.has('procedure')) {
    reader.log.warn({
      code: 'QB_E_CONFIG_MISSING',
      path: view.child('procedure'),
      offset: view.offset,
      expected: "the site procedure that governs this machine's vibration response",
      found: 'nothing',
      detail: 'no procedure named: advisories for this asset will defer to site procedures in general',
    });
  }

  // Sensors and orders first: components and the speed source refer to them by id.
  const sensorIds: string[] = [];
  const drafts = readList(reader, view, 'sensors', 'a list of sensors', (n, p) => {
    const r = readSensor(reader, n, p);
    return { id: r.id, item: r.sensor };
  }, sensorIds);
  const orderIds: string[] = [];
  const orders = readList(reader, view, 'orders', 'a list of orders', (n, p) => {
    const r = readOrder(reader, n, p);
    return { id: r.id, item: r.order };
  }, orderIds);
  const speed = view.has('speed')
    ? readSpeed(reader, view, sensorIds)
    : view.missing('speed', 'a mapping with source and range_rpm');
  const sensors = drafts && assignInternalChannels(drafts, speed);
  const components = readList(reader, view, 'components', 'a list of components', (n, p) => {
    const r = readComponent(reader, n, p, { orderIds, sensorIds });
    return { id: r.id, item: r.component };
  });
  const alarm = view.has('alarm') ? readAlarm(reader, view) : view.missing('alarm', 'a mapping with on_delay_s, off_delay_s, deadband_pct, priority');
  const analysis = view.has('analysis') ? readAnalysis(reader, view) : { ...DEFAULT_ANALYSIS };
  const transients = view.has('transients') ? readTransients(reader, view) : { ...DEFAULT_TRANSIENT_SETTINGS };
  const severity = view.has('severity') ? readSeverity(reader, view) : { ...DEFAULT_SEVERITY, zoneBoundariesMmS: [...DEFAULT_SEVERITY.zoneBoundariesMmS] as [number, number, number] };
  const drive = view.has('drive') ? readDrive(reader, view) : null;
  checkChannels(reader, view);
  if (components && components.length > 0) checkPairCount(reader, view, components);

  if (
    id === undefined ||
    description === undefined ||
    procedure === undefined ||
    !speed ||
    !orders ||
    !sensors ||
    !components ||
    !alarm ||
    !analysis ||
    !transients ||
    !severity ||
    drive === undefined
  ) {
    return { id };
  }
  const item: AssetConfig = { id, description, procedure, speed, orders, sensors, components, alarm, analysis, severity, transients };
  if (drive) item.drive = drive;
  return { id, item };
}

function readSensor(reader: Reader, node: Node | null, path: string): { id?: string; sensor?: SensorDraft } {
  const view = reader.map(node, path, SENSOR_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  // Optional: a sensor fed only over MQTT has no recording channel (config/internalChannels.ts).
  const channel = view.has('channel') ? view.number('channel', sensorRule('channel')) : null;
  const units = view.text('units', { oneOf: SENSOR_UNITS }) as SensorUnits | undefined;
  const topic = view.has('topic') ? view.text('topic') : undefined;
  let scale: number | undefined = 1;
  if (view.has('scale') && view.has('sensitivity_mv_per_unit')) {
    reader.log.error({
      code: 'QB_E_CONFIG_CONFLICT',
      path: view.child('sensitivity_mv_per_unit'),
      offset: view.keyOffset('sensitivity_mv_per_unit'),
      expected: 'exactly one of scale, sensitivity_mv_per_unit',
      found: "'scale' and 'sensitivity_mv_per_unit'",
      detail: "conflicts with 'scale': give the multiplier or the sensitivity, not both",
    });
    scale = undefined;
  } else if (view.has('sensitivity_mv_per_unit')) {
    // Raw samples in volts: units = volts * 1000 / (mV per unit).
    const mvPerUnit = view.number('sensitivity_mv_per_unit', sensorRule('sensitivity_mv_per_unit'));
    scale = mvPerUnit === undefined ? undefined : 1000 / mvPerUnit;
  } else {
    scale = view.number('scale', sensorRule('scale'), 1);
  }
  if (view.has('topic') && topic === undefined) return { id };
  if (id === undefined || channel === undefined || units === undefined || scale === undefined) return { id };
  const sensor: SensorDraft = { id, units, scale, ...(channel === null ? {} : { channel }), ...(topic === undefined ? {} : { topic }) };
  return { id, sensor };
}

function readAlarm(reader: Reader, asset: MapView): AlarmConfig | undefined {
  const view = reader.map(asset.get('alarm') ?? null, asset.child('alarm'), ALARM_KEYS, asset.keyOffset('alarm'));
  if (!view) return undefined;
  const onDelayS = view.number('on_delay_s', alarmRule('on_delay_s'));
  const offDelayS = view.number('off_delay_s', alarmRule('off_delay_s'));
  const deadbandPct = view.number('deadband_pct', alarmRule('deadband_pct'));
  const priority = view.text('priority', { oneOf: PRIORITIES }) as AlarmConfig['priority'] | undefined;
  const escalateAfterS = view.has('escalate_after_s')
    ? view.number('escalate_after_s', alarmRule('escalate_after_s'))
    : onDelayS === undefined
      ? undefined
      : DEFAULT_ESCALATE_AFTER_ON_DELAYS * onDelayS;
  const escalateGrowth = view.number('escalate_growth', alarmRule('escalate_growth'), DEFAULT_ESCALATE_GROWTH);
  if (!view.has('escalate_after_s') && onDelayS === 0) {
    reader.log.warn({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child('escalate_after_s'),
      offset: view.valueOffset('on_delay_s'),
      expected: 'escalate_after_s > 0',
      found: '0 (10 x on_delay_s 0)',
      detail: 'defaults to 10 x on_delay_s = 0: an alarm would escalate as soon as it is raised; set escalate_after_s',
    });
  }
  if (
    onDelayS === undefined ||
    offDelayS === undefined ||
    deadbandPct === undefined ||
    priority === undefined ||
    escalateAfterS === undefined ||
    escalateGrowth === undefined
  ) {
    return undefined;
  }
  return { onDelayS, offDelayS, deadbandPct, priority, escalateAfterS, escalateGrowth };
}

function readSeverity(reader: Reader, asset: MapView): SeverityConfig | undefined {
  const view = reader.map(asset.get('severity') ?? null, asset.child('severity'), SEVERITY_KEYS, asset.keyOffset('severity'));
  if (!view) return undefined;
  // Both are required once the block is written: the default basis would mislabel the site's own boundaries.
  const bounds = view.numbers('zone_boundaries_mm_s', 3, ruleOf(SEVERITY_BLOCK, 'zone_boundaries_mm_s'));
  const basis = view.text('basis');
  if (bounds && !(bounds[0] < bounds[1] && bounds[1] < bounds[2])) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child('zone_boundaries_mm_s'),
      offset: view.valueOffset('zone_boundaries_mm_s'),
      expected: '[ab, bc, cd] in ascending order',
      found: `[${bounds.join(', ')}]`,
    });
    return undefined;
  }
  if (!bounds || basis === undefined) return undefined;
  return { zoneBoundariesMmS: [bounds[0], bounds[1], bounds[2]], basis };
}

function checkPairCount(reader: Reader, asset: MapView, components: readonly ComponentConfig[]): void {
  let pairs = 0;
  for (const c of components) pairs += c.orderIds.length;
  if (pairs <= MAX_PAIRS_PER_ASSET) return;
  reader.log.error({
    code: 'QB_E_CONFIG_RANGE',
    path: asset.child('components'),
    offset: asset.keyOffset('components'),
    expected: `at most ${MAX_PAIRS_PER_ASSET} (component, order) pairs`,
    found: `${pairs} pairs`,
    detail: `${components.length} components with their orders make ${pairs} (component, order) pairs to watch, more than the ${MAX_PAIRS_PER_ASSET} allowed: name the orders that can excite each component (its 'orders' list)`,
  });
}
