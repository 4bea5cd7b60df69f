/**
 * Follows aliases (`*name`) to their anchored node in constant time. The YAML library's own
 * `Alias.resolve` searches the whole document on every call, so a map of many aliases costs
 * aliases x document size; this index is built once per document.
 */
import { isAlias, isMap, isPair, isSeq, type Document, type Node } from 'yaml';

export type ResolveAlias = (node: unknown) => unknown;

export function aliasResolver(doc: Document): ResolveAlias {
  // Anchors in document order; an alias refers to the latest definition before it.
  const byName = new Map<string, Array<{ at: number; node: Node }>>();
  const stack: unknown[] = [doc.contents];
  while (stack.length > 0) {
    const node = stack.pop();
    if (node === null || node === undefined || isAlias(node)) continue;
    const anchor = (node as { anchor?: string }).anchor;
    if (anchor) {
      const list = byName.get(anchor) ?? [];
      list.push({ at: (node as Node).range?.[0] ?? 0, node: node as Node });
      byName.set(anchor, list);
    }
    if (isMap(node)) for (const p of node.items) if (isPair(p)) stack.push(p.value, p.key);
    if (isSeq(node)) for (let i = node.items.length - 1; i >= 0; i--) stack.push(node.items[i]);
  }
  for (const list of byName.values()) list.sort((a, b) => a.at - b.at);
  return (node) => {
    if (!isAlias(node)) return node;
    const list = byName.get(node.source);
    if (!list) return null;
    const at = node.range?.[0] ?? Number.POSITIVE_INFINITY;
    let found: Node | null = null;
    for (const entry of list) {
      if (entry.at > at) break;
      found = entry.node;
    }
    return found;
  };
}
