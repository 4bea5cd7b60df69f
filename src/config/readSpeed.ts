/**
 * The `speed:` block of an asset: where shaft speed comes from (a tach channel, the 1X line of
 * a sensor's spectrum, or speed records on a topic), the operating range and how far the
 * speed track may be trusted. Keys that belong to another source are refused.
 */
import { quote } from '../text/printable.ts';
import { keysOf, MAX_SPEED_RPM, ruleOf, SPEED_BLOCK, SPEED_SOURCES } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import type { SpeedConfig, SpeedSource } from './types.ts';

export { MAX_SPEED_RPM };
const SPEED_KEYS = keysOf(SPEED_BLOCK);
const rule = (key: string) => ruleOf(SPEED_BLOCK, key);

export const DEFAULT_MIN_CONFIDENCE = 0.6;
export const DEFAULT_MAX_AGE_S = 2;

export function readSpeed(reader: Reader, asset: MapView, sensorIds: readonly string[]): SpeedConfig | undefined {
  const view = reader.map(asset.get('speed') ?? null, asset.child('speed'), SPEED_KEYS, asset.keyOffset('speed'));
  if (!view) return undefined;
  const source = view.text('source', { oneOf: SPEED_SOURCES }) as SpeedSource | undefined;
  const range = view.numbers('range_rpm', 2, rule('range_rpm'));
  let rangeRpm: [number, number] | undefined;
  if (range) {
    if (range[0] < range[1]) rangeRpm = [range[0], range[1]];
    else {
      reader.log.error({
        code: 'QB_E_CONFIG_RANGE',
        path: view.child('range_rpm'),
        offset: view.valueOffset('range_rpm'),
        expected: '[min, max] with min < max',
        found: `[${range[0]}, ${range[1]}]`,
      });
    }
  }
  const minConfidence = view.number('min_confidence', rule('min_confidence'), DEFAULT_MIN_CONFIDENCE);
  const maxAgeS = view.number('max_age_s', rule('max_age_s'), DEFAULT_MAX_AGE_S);

  // Keys that belong to one source only: elsewhere they would silently do nothing.
  const owner: Record<'channel' | 'pulses_per_rev' | 'sensor' | 'topic', SpeedSource[]> = {
    channel: ['tach'],
    pulses_per_rev: ['tach'],
    sensor: ['spectrum'],
    topic: ['topic', 'tach'],
  };
  for (const [key, sources] of Object.entries(owner)) {
    if (source !== undefined && !sources.includes(source) && view.has(key)) {
      view.notApplicable(key, `'${key}' is used with source ${sources.map((x) => `'${x}'`).join(' or ')} only`);
    }
  }
  let channel: number | undefined;
  let pulsesPerRev: number | undefined = 1;
  let sensor: string | undefined;
  let topic: string | undefined;
  let ok = source !== undefined;
  if (source === 'tach') {
    channel = view.number('channel', rule('channel'));
    pulsesPerRev = view.number('pulses_per_rev', rule('pulses_per_rev'), 1);
    // Live agent: the tach pulse blocks arrive on this topic (default <prefix>/<asset>/samples/tach).
    if (view.has('topic')) topic = view.text('topic');
    ok &&= channel !== undefined && pulsesPerRev !== undefined && (topic !== undefined || !view.has('topic'));
  } else if (source === 'spectrum') {
    sensor = view.text('sensor', { id: true });
    if (sensor !== undefined && !sensorIds.includes(sensor)) {
      reader.log.error({
        code: 'QB_E_CONFIG_REFERENCE',
        path: view.child('sensor'),
        offset: view.valueOffset('sensor'),
        expected: sensorIds.length ? `one of the asset's sensor ids: ${sensorIds.join(', ')}` : 'a sensor id, but the asset defines none',
        found: quote(sensor),
      });
      sensor = undefined;
    }
    ok &&= sensor !== undefined;
  } else if (source === 'topic') {
    topic = view.text('topic');
    ok &&= topic !== undefined;
  }
  if (!ok || !rangeRpm || minConfidence === undefined || maxAgeS === undefined || pulsesPerRev === undefined) return undefined;
  const speed: SpeedConfig = { source: source!, pulsesPerRev, rangeRpm, minConfidence, maxAgeS };
  if (channel !== undefined) speed.channel = channel;
  if (sensor !== undefined) speed.sensor = sensor;
  if (topic !== undefined) speed.topic = topic;
  return speed;
}

