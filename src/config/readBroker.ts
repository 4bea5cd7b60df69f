/** The `broker:` block: where the live agent connects and the prefix of its topics. */
import { quote } from '../text/printable.ts';
import { BROKER_BLOCK, keysOf } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import type { BrokerConfig } from './types.ts';

const BROKER_KEYS = keysOf(BROKER_BLOCK);
export const DEFAULT_TOPIC_PREFIX = 'qband';

export function readBroker(reader: Reader, top: MapView): BrokerConfig | undefined {
  const view = reader.map(top.get('broker') ?? null, 'broker', BROKER_KEYS, top.keyOffset('broker'));
  if (!view) return undefined;
  const url = view.text('url');
  const topicPrefix = view.text('topic_prefix', { fallback: DEFAULT_TOPIC_PREFIX });
  if (url !== undefined && !isUrl(url)) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: 'broker.url',
      offset: view.valueOffset('url'),
      expected: 'a URL such as mqtt://host:1883',
      found: quote(url),
    });
    return undefined;
  }
  if (topicPrefix !== undefined && /[+#]/.test(topicPrefix)) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: 'broker.topic_prefix',
      offset: view.valueOffset('topic_prefix'),
      expected: "a topic prefix without MQTT wildcards '+' or '#'",
      found: quote(topicPrefix),
    });
    return undefined;
  }
  return url !== undefined && topicPrefix !== undefined ? { url, topicPrefix } : undefined;
}

function isUrl(s: string): boolean {
  try {
    return new URL(s).host !== '';
  } catch {
    return false;
  }
}
