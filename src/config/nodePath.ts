/** The path in the map (`assets[0].sensors[1]`) of the innermost collection holding an offset. */
import { isMap, isScalar, isSeq, type Node, type ParsedNode } from 'yaml';
import { printable } from '../text/printable.ts';

function contains(node: unknown, offset: number): boolean {
  const range = (node as Node | null)?.range;
  return !!range && offset >= range[0] && offset < range[2];
}

/** Null when no collection of the document holds `offset`; '' for the top mapping. */
export function nodePathAt(root: ParsedNode | null, offset: number): string | null {
  if (!contains(root, offset)) return null;
  let node: unknown = root;
  let path = '';
  // Iterative: the depth is bounded before parsing, but a loop costs nothing.
  for (;;) {
    let next: { node: unknown; path: string } | undefined;
    if (isMap(node)) {
      for (const pair of node.items) {
        if (contains(pair.value, offset) && !isScalar(pair.value)) {
          const key = isScalar(pair.key) ? printable(String(pair.key.value), 40) : '?';
          next = { node: pair.value, path: path === '' ? key : `${path}.${key}` };
          break;
        }
      }
    } else if (isSeq(node)) {
      node.items.forEach((item, i) => {
        if (!next && contains(item, offset) && !isScalar(item)) next = { node: item, path: `${path}[${i}]` };
      });
    }
    if (!next) return path;
    ({ node, path } = next);
  }
}
