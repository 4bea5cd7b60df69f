/** Lists of items with ids (assets, sensors, orders, components): each read, ids unique. */
import { isMap, type Node } from 'yaml';
import type { MapView, Reader } from './mapView.ts';

/**
 * Reads a required, non-empty list with `read` per item and checks that item ids are unique.
 * Returns the items only when every one of them was read.
 */
export function readList<T extends { id: string }>(
  reader: Reader,
  parent: MapView,
  key: string,
  expected: string,
  read: (node: Node | null, path: string) => { id?: string; item?: T; offset?: number },
  ids?: string[],
): T[] | undefined {
  if (!parent.has(key)) return parent.missing(key, expected);
  const listNode = parent.present(key, expected);
  if (!listNode) return undefined;
  const path = parent.child(key);
  const items = reader.list(listNode, path, expected);
  if (!items) return undefined;
  if (items.length === 0) {
    reader.log.error({ code: 'QB_E_CONFIG_RANGE', path, offset: reader.offset(listNode), expected: `${expected}, at least one`, found: 'an empty list' });
    return undefined;
  }
  const out: T[] = [];
  const seen = new Map<string, string>();
  let ok = true;
  items.forEach((node, i) => {
    const itemPath = `${path}[${i}]`;
    const { id, item } = read(node, itemPath);
    if (id !== undefined) {
      const first = seen.get(id);
      if (first !== undefined) {
        ok = false;
        reader.log.error({
          code: 'QB_E_CONFIG_DUPLICATE',
          path: `${itemPath}.id`,
          offset: idOffset(reader, node),
          expected: 'an id not used before in this list',
          found: `'${id}'`,
          detail: `id '${id}' is already used by ${first}`,
        });
      } else {
        seen.set(id, itemPath);
        ids?.push(id);
      }
    }
    if (item === undefined) ok = false;
    else out.push(item);
  });
  return ok ? out : undefined;
}

function idOffset(reader: Reader, node: Node | null): number | undefined {
  if (isMap(node)) {
    const pair = node.items.find((p) => (p.key as { value?: unknown } | null)?.value === 'id');
    const value = pair?.value as Node | undefined;
    if (value?.range) return value.range[0];
  }
  return reader.offset(node);
}
