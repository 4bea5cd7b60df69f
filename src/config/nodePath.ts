/** Where an offset lies in the map: the path of the innermost node holding it, for messages. */
import { isMap, isScalar, isSeq, type Node, type ParsedNode } from 'yaml';
import { printable } from '../text/printable.ts';

function contains(node: unknown, offset: number): boolean {
  const range = (node as Node | null)?.range;
  return !!range && offset >= range[0] && offset < Math.max(range[1], range[0] + 1);
}

function keyName(key: unknown): string {
  return isScalar(key) ? printable(String(key.value), 40) : '?';
}

/**
 * The path of the key written at `offset` (`assets[0].sensors[1].channel`), or of the
 * innermost collection holding it when no key starts there; null when nothing does.
 */
export function pathAtOffset(root: ParsedNode | null, offset: number): { path: string; key: string | null } | null {
  if (!root?.range || offset < root.range[0] || offset >= root.range[2]) return null;
  let node: unknown = root;
  let path = '';
  const join = (key: string) => (path === '' ? key : `${path}.${key}`);
  // Iterative: the depth is bounded before parsing, but a loop costs nothing.
  for (;;) {
    let next: { node: unknown; path: string } | undefined;
    if (isMap(node)) {
      for (const pair of node.items) {
        if (contains(pair.key, offset)) return { path: join(keyName(pair.key)), key: keyName(pair.key) };
        const value = pair.value as Node | null;
        if (value?.range && offset >= value.range[0] && offset < value.range[2] && !isScalar(value)) {
          next = { node: value, path: join(keyName(pair.key)) };
          break;
        }
      }
    } else if (isSeq(node)) {
      node.items.forEach((item, i) => {
        const range = (item as Node | null)?.range;
        if (!next && range && offset >= range[0] && offset < range[2] && !isScalar(item)) next = { node: item, path: `${path}[${i}]` };
      });
    }
    if (!next) return { path, key: null };
    ({ node, path } = next);
  }
}
