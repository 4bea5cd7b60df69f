/**
 * Checks across items that read the raw YAML nodes, so they run even when other fields of the
 * same items are wrong: one recording channel per signal, one input topic per stream.
 */
import { isMap, isScalar, isSeq, type YAMLMap } from 'yaml';
import { quote } from '../text/printable.ts';
import type { MapView, Reader } from './mapView.ts';
import { DEFAULT_TOPIC_PREFIX } from './readBroker.ts';

/**
 * A recording channel carries one signal: two sensors, or a sensor and the tach, cannot share it.
 * Read from the raw nodes so the check runs even when other fields of the same items are wrong.
 */
export function checkChannels(reader: Reader, asset: MapView): void {
  const owners = new Map<number, string>();
  const speedNode = asset.get('speed');
  const tach = isMap(speedNode) && rawValue(reader, speedNode, 'source')?.value === 'tach' ? rawValue(reader, speedNode, 'channel') : undefined;
  if (typeof tach?.value === 'number') owners.set(tach.value, `the tach (${asset.child('speed')}.channel)`);
  const sensorsNode = asset.get('sensors');
  if (!isSeq(sensorsNode)) return;
  sensorsNode.items.forEach((node, i) => {
    const item = reader.resolve(node);
    if (!isMap(item)) return;
    const channel = rawValue(reader, item, 'channel');
    if (typeof channel?.value !== 'number' || !Number.isInteger(channel.value)) return;
    const id = rawValue(reader, item, 'id')?.value;
    const first = owners.get(channel.value);
    if (first !== undefined) {
      reader.log.error({
        code: 'QB_E_CONFIG_DUPLICATE',
        path: `${asset.child('sensors')}[${i}].channel`,
        offset: channel.offset,
        expected: 'a channel that no other sensor or tach of this asset uses',
        found: String(channel.value),
        detail: `channel ${channel.value} is already bound to ${first}`,
      });
    } else {
      owners.set(channel.value, id === undefined ? `${asset.child('sensors')}[${i}]` : `sensor ${quote(String(id))}`);
    }
  });
}

/**
 * An input topic carries one stream: two sensors, a sensor and a tach, or a speed topic that
 * is also a sample topic would mix unrelated data, in one asset or across assets. Default
 * topics count too (`<prefix>/<asset>/samples/<sensor>`, `.../samples/tach`).
 */
export function checkInputTopics(reader: Reader, top: MapView): void {
  const brokerNode = top.get('broker');
  const rawPrefix = isMap(brokerNode) ? rawValue(reader, brokerNode, 'topic_prefix')?.value : undefined;
  const prefix = typeof rawPrefix === 'string' ? rawPrefix : DEFAULT_TOPIC_PREFIX;
  const assetsNode = top.get('assets');
  if (!isSeq(assetsNode)) return;
  const owners = new Map<string, string>();
  const claim = (topic: string, owner: string, path: string, offset: number | undefined) => {
    const first = owners.get(topic);
    if (first === undefined) {
      owners.set(topic, owner);
      return;
    }
    reader.log.error({
      code: 'QB_E_CONFIG_DUPLICATE',
      path,
      offset,
      expected: 'an input topic that no other sensor, tach or speed source of the map uses',
      found: quote(topic),
      detail: `topic ${quote(topic)} is already the input of ${first}`,
    });
  };
  assetsNode.items.forEach((node, a) => {
    const asset = reader.resolve(node);
    if (!isMap(asset)) return;
    const assetId = String(rawValue(reader, asset, 'id')?.value ?? `assets[${a}]`);
    const base = `${prefix}/${assetId}`;
    const sensors = reader.resolve(asset.items.find((p) => isScalar(p.key) && p.key.value === 'sensors')?.value);
    if (isSeq(sensors)) {
      sensors.items.forEach((sNode, i) => {
        const sensor = reader.resolve(sNode);
        if (!isMap(sensor)) return;
        const id = String(rawValue(reader, sensor, 'id')?.value ?? i);
        const explicit = rawValue(reader, sensor, 'topic');
        const topic = typeof explicit?.value === 'string' ? explicit.value : `${base}/samples/${id}`;
        claim(topic, `sensor ${quote(id)} of asset ${quote(assetId)}`, `assets[${a}].sensors[${i}].topic`, explicit?.offset ?? reader.offset(sensor));
      });
    }
    const speed = reader.resolve(asset.items.find((p) => isScalar(p.key) && p.key.value === 'speed')?.value);
    if (!isMap(speed)) return;
    const source = rawValue(reader, speed, 'source')?.value;
    const explicit = rawValue(reader, speed, 'topic');
    if (source === 'tach') {
      const topic = typeof explicit?.value === 'string' ? explicit.value : `${base}/samples/tach`;
      claim(topic, `the tach of asset ${quote(assetId)}`, `assets[${a}].speed.topic`, explicit?.offset ?? reader.offset(speed));
    } else if (source === 'topic' && typeof explicit?.value === 'string') {
      claim(explicit.value, `the speed records of asset ${quote(assetId)}`, `assets[${a}].speed.topic`, explicit.offset);
    }
  });
}

/** The scalar value under `key` of a raw mapping node, with its offset; undefined when absent. */
function rawValue(reader: Reader, map: YAMLMap, key: string): { value: unknown; offset: number | undefined } | undefined {
  const pair = map.items.find((p) => isScalar(p.key) && p.key.value === key);
  const value = reader.resolve(pair?.value);
  return isScalar(value) ? { value: value.value, offset: reader.offset(value) } : undefined;
}

