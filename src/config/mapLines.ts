/**
 * Where a component's natural frequency and damping are written in a map file: the line, its
 * text and the value's columns, for advisories that show the lines to change.
 */
import { isMap, isScalar, LineCounter, parseDocument, type Node } from 'yaml';
import type { ComponentLines } from '../identification/driftAdvisory.ts';

const KEYS = ['fn_hz', 'q', 'zeta', 'band_hz'];

export function componentLines(mapText: string, assetId: string, componentId: string): ComponentLines | null {
  const counter = new LineCounter();
  const doc = parseDocument(mapText, { lineCounter: counter });
  const assets = doc.get('assets');
  if (!assets || typeof assets !== 'object' || !('items' in assets)) return null;
  const textLines = mapText.split('\n');
  for (const asset of (assets as { items: unknown[] }).items) {
    if (!isMap(asset) || String(asset.get('id')) !== assetId) continue;
    const components = asset.get('components');
    if (!components || typeof components !== 'object' || !('items' in components)) return null;
    for (const c of (components as { items: unknown[] }).items) {
      if (!isMap(c) || String(c.get('id')) !== componentId) continue;
      const keys: ComponentLines['keys'] = [];
      for (const pair of c.items) {
        const key = isScalar(pair.key) ? String(pair.key.value) : '';
        const value = pair.value as Node | null;
        if (!KEYS.includes(key) || !value?.range) continue;
        const start = counter.linePos(value.range[0]);
        const end = counter.linePos(value.range[1]);
        if (end.line !== start.line) continue;
        keys.push({ key, line: start.line, text: textLines[start.line - 1] ?? '', valueFrom: start.col - 1, valueTo: end.col - 1 });
      }
      return { keys };
    }
  }
  return null;
}
