/**
 * How deeply a YAML text nests, found before it is parsed: the YAML composer recurses once per
 * level, and a few thousand levels exhaust the stack. The scan is iterative over the lexer's
 * tokens: flow collections count their brackets; block nodes count the distinct indentation
 * columns open above them (a node more indented than the one before is inside it). That counts
 * a scalar value as a level too, so it is an upper bound on the real depth, close enough for a
 * limit that no asset map or profile comes near.
 */
import { CST, Lexer } from 'yaml';

/** Levels a map or profile may nest; an asset map needs about eight. */
export const MAX_YAML_DEPTH = 64;

/** The offset of the first token nested deeper than `maxDepth`, or null when none is. */
export function firstTooDeep(text: string, maxDepth = MAX_YAML_DEPTH): number | null {
  let offset = 0;
  let flowDepth = 0;
  const columns: number[] = [];
  for (const token of new Lexer().lex(text)) {
    const type = CST.tokenType(token);
    const start = offset;
    // Lexer control tokens (document mode, scalar marker, flow error end) take no source text.
    if (type !== 'doc-mode' && type !== 'scalar' && type !== 'flow-error-end') offset += token.length;
    switch (type) {
      case 'flow-seq-start':
      case 'flow-map-start':
        flowDepth++;
        break;
      case 'flow-seq-end':
      case 'flow-map-end':
        flowDepth = Math.max(0, flowDepth - 1);
        continue;
      case 'doc-start':
      case 'doc-end':
        columns.length = 0;
        flowDepth = 0;
        continue;
      case 'seq-item-ind':
      case 'explicit-key-ind':
      case 'alias':
      case 'anchor':
      case 'tag':
      case 'single-quoted-scalar':
      case 'double-quoted-scalar':
      case 'block-scalar-header':
      case null: // the text of a plain scalar
        break;
      default:
        continue;
    }
    // Block structure (outside flow brackets; an opening bracket starts a block-level node):
    // only the column where a node starts matters.
    if (flowDepth === 0 || (flowDepth === 1 && (type === 'flow-seq-start' || type === 'flow-map-start'))) {
      const col = start - (text.lastIndexOf('\n', start - 1) + 1);
      while (columns.length > 0 && columns[columns.length - 1] > col) columns.pop();
      if (columns.length === 0 || columns[columns.length - 1] < col) columns.push(col);
    }
    if (columns.length + flowDepth > maxDepth) return start;
  }
  return null;
}
