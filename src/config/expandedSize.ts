/**
 * How many values a YAML document holds once its aliases (`*name`) are followed. The readers
 * follow aliases, so a short text of aliases to aliases ("billion laughs") would have them read
 * millions of values; the count is bounded before reading. Computed without recursion, each
 * anchored node once (memo), and a node that contains an alias to itself counts as unbounded.
 */
import { isAlias, isMap, isPair, isSeq, type Document, type Node } from 'yaml';
import { aliasResolver, type ResolveAlias } from './aliasResolver.ts';

/** Values an asset map may expand to: about 40 times the example map's, generous for aliases. */
export const MAX_EXPANDED_VALUES = 200_000;

function children(node: unknown): unknown[] {
  if (isMap(node)) return node.items.flatMap((p) => (isPair(p) ? [p.key, p.value] : []));
  if (isSeq(node)) return node.items;
  return [];
}

/** The expanded count, or `limit + 1` as soon as it is known to exceed `limit`. */
export function expandedSize(doc: Document, limit = MAX_EXPANDED_VALUES, target: ResolveAlias = aliasResolver(doc)): number {
  const memo = new Map<unknown, number>();
  const open = new Set<unknown>();
  const root = target(doc.contents);
  if (root === null || root === undefined) return 0;
  const stack: unknown[] = [root];
  while (stack.length > 0) {
    const node = stack[stack.length - 1];
    if (memo.has(node)) {
      stack.pop();
      continue;
    }
    const kids = children(node).map(target).filter((k) => k !== null && k !== undefined);
    if (!open.has(node)) {
      open.add(node);
      for (const k of kids) {
        if (open.has(k) && !memo.has(k)) return limit + 1; // an alias inside its own anchor
        if (!memo.has(k)) stack.push(k);
      }
      continue;
    }
    let total = 1;
    for (const k of kids) total += memo.get(k) ?? 0;
    memo.set(node, Math.min(total, limit + 1));
    stack.pop();
  }
  return memo.get(root) ?? 0;
}

/** Where the first alias of the document is written (to point at), or undefined. */
export function firstAliasOffset(doc: Document): number | undefined {
  const stack: unknown[] = [doc.contents];
  while (stack.length > 0) {
    const node = stack.pop();
    if (isAlias(node)) return (node as Node).range?.[0];
    stack.push(...children(node).reverse());
  }
  return undefined;
}
