/**
 * The `sparkplug:` block: the live agent's Sparkplug B output (src/sparkplug/). Absent: off.
 * Keys, bounds and descriptions are rows of SPARKPLUG_BLOCK (mapKeys.ts).
 */
import { keysOf, ruleOf, SPARKPLUG_BLOCK } from './mapKeys.ts';
import type { MapView, Reader } from './mapView.ts';
import type { SparkplugConfig } from './types.ts';

export const DEFAULT_MIN_DATA_INTERVAL_S = 1;

export function readSparkplug(reader: Reader, top: MapView): SparkplugConfig | undefined {
  const view = reader.map(top.get('sparkplug') ?? null, 'sparkplug', keysOf(SPARKPLUG_BLOCK), top.keyOffset('sparkplug'));
  if (!view) return undefined;
  const groupId = view.text('group_id', { id: true });
  const edgeNodeId = view.text('edge_node_id', { id: true });
  const minDataIntervalS = view.number('min_data_interval_s', ruleOf(SPARKPLUG_BLOCK, 'min_data_interval_s'), DEFAULT_MIN_DATA_INTERVAL_S);
  if (groupId === undefined || edgeNodeId === undefined || minDataIntervalS === undefined) return undefined;
  return { groupId, edgeNodeId, minDataIntervalS };
}
