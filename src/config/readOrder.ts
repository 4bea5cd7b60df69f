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

export const ORDER_KEYS = ['id', 'multiple', 'vanes', 'blades', 'teeth', 'bearing', 'tone', 'shaft_ratio'] as const;
const ORDER_DEFINERS = ['multiple', 'vanes', 'blades', 'teeth', 'bearing'] as const;
const BEARING_KEYS = ['rolling_elements', 'element_diameter', 'pitch_diameter', 'contact_angle_deg'] as const;
export const BEARING_TONES = ['bpfo', 'bpfi', 'bsf', 'ftf'] as const satisfies readonly BearingTone[];

/** Reads one order; `order` is absent (and the reasons logged) when it cannot be built. */
export function readOrder(
  reader: Reader,
  node: Node | null,
  path: string,
): { id?: string; order?: OrderConfig; view?: MapView } {
  const view = reader.map(node, path, ORDER_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  const shaftRatio = view.number('shaft_ratio', { gt: 0 }, 1);

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
      const m = view.number('multiple', { gt: 0 });
      if (m !== undefined) base = { multiple: m, kind: 'multiple', derivation: `multiple ${fmt(m)}` };
      break;
    }
    case 'vanes':
    case 'blades':
    case 'teeth': {
      const key = given[0];
      const n = view.number(key, { integer: true, ge: 1 });
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
  const rollingElements = view.number('rolling_elements', { integer: true, ge: 1 });
  const elementDiameter = view.number('element_diameter', { gt: 0 });
  const pitchDiameter = view.number('pitch_diameter', { gt: 0 });
  const contactAngleDeg = view.number('contact_angle_deg', { ge: 0, lt: 90 }, 0);
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
