/**
 * The `speed:` block of an asset: where shaft speed comes from (a tach channel, the 1X line of
 * a sensor's spectrum, or speed records on a topic), the operating range and how far the
 * speed track may be trusted. Keys that belong to another source are refused.
 */
import { quote } from '../text/printable.ts';
import { MAX_RECORDING_CHANNELS } from '../acquisition/recordingLimits.ts';
import type { MapView, Reader } from './mapView.ts';
import type { SpeedConfig, SpeedSource } from './types.ts';

/** Channels are numbered from 0; a recording has at most MAX_RECORDING_CHANNELS. */
const MAX_CHANNEL = MAX_RECORDING_CHANNELS - 1;

const SPEED_KEYS = [
  'source',
  'channel',
  'pulses_per_rev',
  'range_rpm',
  'sensor',
  'topic',
  'min_confidence',
  'max_age_s',
] as const;
const SPEED_SOURCES = ['tach', 'spectrum', 'topic'] as const satisfies readonly SpeedSource[];
/** No rotating machine qband watches turns faster (common practice: turbo machinery stays below 1e5 rpm). */
export const MAX_SPEED_RPM = 1_000_000;
/** Pulses per revolution of a tach: a toothed wheel has a few hundred at most. */
const MAX_PULSES_PER_REV = 10_000;

export const DEFAULT_MIN_CONFIDENCE = 0.6;
export const DEFAULT_MAX_AGE_S = 2;

export function readSpeed(reader: Reader, asset: MapView, sensorIds: readonly string[]): SpeedConfig | undefined {
  const view = reader.map(asset.get('speed') ?? null, asset.child('speed'), SPEED_KEYS, asset.keyOffset('speed'));
  if (!view) return undefined;
  const source = view.text('source', { oneOf: SPEED_SOURCES }) as SpeedSource | undefined;
  const range = view.numbers('range_rpm', 2, { gt: 0, le: MAX_SPEED_RPM });
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
  const minConfidence = view.number('min_confidence', { ge: 0, le: 1 }, DEFAULT_MIN_CONFIDENCE);
  const maxAgeS = view.number('max_age_s', { gt: 0, le: 3600 }, DEFAULT_MAX_AGE_S);

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
    channel = view.number('channel', { integer: true, ge: 0, le: MAX_CHANNEL });
    pulsesPerRev = view.number('pulses_per_rev', { integer: true, ge: 1, le: MAX_PULSES_PER_REV }, 1);
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

