/**
 * One forcing order of the asset map, turned into a multiple of the reference shaft speed.
 *
 * Exactly one of: `multiple` (any positive number), `vanes` (vane pass), `blades` (blade pass),
 * `teeth` (gear mesh of a gear on the shaft), or `bearing` geometry with a `tone`. An optional
 * `shaft_ratio` (speed of the shaft the order lives on / reference shaft speed) multiplies any of
 * them, for orders on intermediate shafts.
 */
import { bearingOrders, type BearingTone } from '../physics/bearingOrders.ts';
import type { OrderConfig, OrderKind } from './types.ts';
import type { MapView, Reader } from './mapView.ts';
import type { Node } from 'yaml';
import { BEARING_TONES, keysOf, ORDER_BLOCK, ruleOf, specOf } from './mapKeys.ts';

export { BEARING_TONES };
export const ORDER_KEYS = keysOf(ORDER_BLOCK);
const ORDER_DEFINERS = ORDER_BLOCK.exactlyOne as readonly ('multiple' | 'vanes' | 'blades' | 'teeth' | 'bearing')[];
const BEARING = specOf(ORDER_BLOCK, 'bearing').block!;
const BEARING_KEYS = keysOf(BEARING);

/** Reads one order; `order` is absent (and the reasons logged) when it cannot be built. */
export function readOrder(
  reader: Reader,
  node: Node | null,
  path: string,
): { id?: string; order?: OrderConfig; view?: MapView } {
  const view = reader.map(node, path, ORDER_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  const shaftRatio = view.number('shaft_ratio', ruleOf(ORDER_BLOCK, 'shaft_ratio'), 1);

  const given = ORDER_DEFINERS.filter((k) => view.has(k));
  if (given.length === 0) {
    view.missing('multiple', `exactly one of ${ORDER_DEFINERS.join(', ')}`);
  }
  for (const extra of given.slice(1)) {
    reader.log.error({
      code: 'QB_E_CONFIG_CONFLICT',
      path: view.child(extra),
      offset: view.keyOffset(extra),
      expected: `exactly one of ${ORDER_DEFINERS.join(', ')}`,
      found: given.map((k) => `'${k}'`).join(' and '),
      detail: `conflicts with '${given[0]}': an order takes exactly one of ${ORDER_DEFINERS.join(', ')}`,
    });
  }
  if (view.has('tone') && given[0] !== 'bearing') view.notApplicable('tone', "'tone' goes with 'bearing' only");

  let base: { multiple: number; kind: OrderKind; derivation: string } | undefined;
  switch (given[0]) {
    case 'multiple': {
      const m = view.number('multiple', ruleOf(ORDER_BLOCK, 'multiple'));
      if (m !== undefined) base = { multiple: m, kind: 'multiple', derivation: `multiple ${fmt(m)}` };
      break;
    }
    case 'vanes':
    case 'blades':
    case 'teeth': {
      const key = given[0];
      const n = view.number(key, ruleOf(ORDER_BLOCK, key));
      const kind: OrderKind = key === 'vanes' ? 'vane-pass' : key === 'blades' ? 'blade-pass' : 'gear-mesh';
      if (n !== undefined) base = { multiple: n, kind, derivation: `${n} ${key}` };
      break;
    }
    case 'bearing': {
      base = readBearing(reader, view);
      break;
    }
    default:
      break;
  }
  if (id === undefined || shaftRatio === undefined || base === undefined) return { id, view };
  return {
    id,
    view,
    order: {
      id,
      multiple: base.multiple * shaftRatio,
      kind: base.kind,
      derivation: `${base.derivation} x ${shaftRatio.toFixed(3)}`,
    },
  };
}

function readBearing(reader: Reader, order: MapView): { multiple: number; kind: OrderKind; derivation: string } | undefined {
  const tone = order.text('tone', { oneOf: BEARING_TONES }) as BearingTone | undefined;
  const view = reader.map(order.get('bearing') ?? null, order.child('bearing'), BEARING_KEYS, order.keyOffset('bearing'));
  if (!view) return undefined;
  const rollingElements = view.number('rolling_elements', ruleOf(BEARING, 'rolling_elements'));
  const elementDiameter = view.number('element_diameter', ruleOf(BEARING, 'element_diameter'));
  const pitchDiameter = view.number('pitch_diameter', ruleOf(BEARING, 'pitch_diameter'));
  const contactAngleDeg = view.number('contact_angle_deg', ruleOf(BEARING, 'contact_angle_deg'), 0);
  if (elementDiameter !== undefined && pitchDiameter !== undefined && !(pitchDiameter > elementDiameter)) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child('pitch_diameter'),
      offset: view.valueOffset('pitch_diameter'),
      expected: `a number > element_diameter (${elementDiameter})`,
      found: String(pitchDiameter),
    });
    return undefined;
  }
  if (tone === undefined || rollingElements === undefined || elementDiameter === undefined) return undefined;
  if (pitchDiameter === undefined || contactAngleDeg === undefined) return undefined;
  const multiple = bearingOrders({ rollingElements, elementDiameter, pitchDiameter, contactAngleDeg })[tone];
  return {
    multiple,
    kind: `bearing-${tone}`,
    derivation:
      `${tone.toUpperCase()} ${multiple.toFixed(4)} (${rollingElements} elements, d/D ` +
      `${(elementDiameter / pitchDiameter).toFixed(4)}, ${fmt(contactAngleDeg)} deg)`,
  };
}

function fmt(x: number): string {
  return Number.isInteger(x) ? String(x) : String(Number(x.toPrecision(6)));
}
