/**
 * One structural component of the asset map: its natural frequency, its damping given as exactly
 * one of `q`, `zeta` or a measured half-power `band_hz`, and the orders and sensors that concern it.
 */
import type { Node } from 'yaml';
import { qFromBand, qFromZeta, velocityHalfPowerBand, zetaFromQ } from '../physics/halfPowerBand.ts';
import type { ComponentConfig, DampingGiven } from './types.ts';
import { quote } from '../text/printable.ts';
import type { MapView, Reader } from './mapView.ts';
import { COMPONENT_BLOCK, keysOf, MIN_Q, ruleOf } from './mapKeys.ts';

export { MIN_Q };
export const COMPONENT_KEYS = keysOf(COMPONENT_BLOCK);
const DAMPING_KEYS = COMPONENT_BLOCK.exactlyOne as readonly DampingGiven[];
const rule = (key: string) => ruleOf(COMPONENT_BLOCK, key);

export interface AssetIds {
  orderIds: readonly string[];
  sensorIds: readonly string[];
}

export function readComponent(
  reader: Reader,
  node: Node | null,
  path: string,
  known: AssetIds,
): { id?: string; component?: ComponentConfig; view?: MapView } {
  const view = reader.map(node, path, COMPONENT_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  const fnHz = view.number('fn_hz', rule('fn_hz'));
  const damping = readDamping(reader, view, fnHz);
  const orderIds = readRefs(reader, view, 'orders', known.orderIds, 'order');
  const sensorIds = readRefs(reader, view, 'sensors', known.sensorIds, 'sensor');
  if (id === undefined || fnHz === undefined || !damping || !orderIds || !sensorIds) return { id, view };
  return { id, view, component: { id, fnHz, ...damping, orderIds, sensorIds } };
}

function readDamping(
  reader: Reader,
  view: MapView,
  fnHz: number | undefined,
): Pick<ComponentConfig, 'q' | 'zeta' | 'bandHz' | 'dampingGiven'> | undefined {
  const given = DAMPING_KEYS.filter((k) => view.has(k));
  if (given.length === 0) return view.missing('q', 'exactly one of q, zeta, band_hz');
  for (const extra of given.slice(1)) {
    reader.log.error({
      code: 'QB_E_CONFIG_CONFLICT',
      path: view.child(extra),
      offset: view.keyOffset(extra),
      expected: 'exactly one of q, zeta, band_hz',
      found: given.map((k) => `'${k}'`).join(' and '),
      detail: `conflicts with '${given[0]}': damping is given by exactly one of q, zeta, band_hz`,
    });
  }
  // The extra keys are still checked on their own, so that every problem shows at once.
  const rules = { q: rule('q'), zeta: rule('zeta') };
  for (const extra of given.slice(1)) {
    if (extra === 'band_hz') view.numbers('band_hz', 2, rule('band_hz'));
    else view.number(extra, rules[extra]);
  }
  const dampingGiven = given[0];
  if (dampingGiven === 'q') {
    const q = view.number('q', rules.q);
    if (q === undefined || fnHz === undefined) return undefined;
    return { q, zeta: zetaFromQ(q), bandHz: velocityHalfPowerBand(fnHz, q), dampingGiven };
  }
  if (dampingGiven === 'zeta') {
    const zeta = view.number('zeta', rules.zeta);
    if (zeta === undefined || fnHz === undefined) return undefined;
    const q = qFromZeta(zeta);
    return { q, zeta, bandHz: velocityHalfPowerBand(fnHz, q), dampingGiven };
  }
  const band = view.numbers('band_hz', 2, rule('band_hz'));
  if (band === undefined || fnHz === undefined) return undefined;
  const [loHz, hiHz] = band;
  const bandPath = view.child('band_hz');
  if (!(loHz < fnHz && fnHz < hiHz)) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: bandPath,
      offset: view.valueOffset('band_hz'),
      expected: `[lo, hi] with lo < fn_hz (${fnHz}) < hi`,
      found: `[${loHz}, ${hiHz}]`,
    });
    return undefined;
  }
  // A measured band: its width gives Q about the stated fn; the band itself is kept as measured.
  const q = qFromBand(loHz, hiHz, fnHz);
  if (q < MIN_Q) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: bandPath,
      offset: view.valueOffset('band_hz'),
      expected: `a band no wider than 2 fn_hz (Q = fn/(hi - lo) >= ${MIN_Q})`,
      found: `[${loHz}, ${hiHz}] (Q ${q.toFixed(3)})`,
    });
    return undefined;
  }
  const centreHz = Math.sqrt(loHz * hiHz);
  if (Math.abs(centreHz - fnHz) > 0.25 * (hiHz - loHz)) {
    reader.log.warn({
      code: 'QB_E_CONFIG_RANGE',
      path: bandPath,
      offset: view.valueOffset('band_hz'),
      expected: `a band centred near fn_hz (${fnHz})`,
      found: `[${loHz}, ${hiHz}], geometric centre ${centreHz.toFixed(3)} Hz`,
      detail: `band centre ${centreHz.toFixed(3)} Hz is far from fn_hz ${fnHz} (more than a quarter of the band width); check both were measured on the same mode`,
    });
  }
  return { q, zeta: zetaFromQ(q), bandHz: [loHz, hiHz], dampingGiven };
}

/**
 * A list of ids referring to the asset's orders or sensors; all of them when the key is absent.
 * Unknown ids are reported where they stand.
 */
function readRefs(
  reader: Reader,
  view: MapView,
  key: 'orders' | 'sensors',
  known: readonly string[],
  what: string,
): string[] | undefined {
  if (!view.has(key)) return [...known];
  const node = view.present(key, `a list of ${what} ids`);
  if (!node) return undefined;
  const items = reader.list(node, view.child(key), `a list of ${what} ids`);
  if (!items) return undefined;
  const ids: string[] = [];
  const knownSet = new Set(known);
  const seen = new Set<string>();
  let ok = true;
  items.forEach((item, i) => {
    const itemPath = `${view.child(key)}[${i}]`;
    const ref = reader.text(item, itemPath, { id: true });
    if (ref === undefined) {
      ok = false;
      return;
    }
    if (seen.has(ref)) {
      // Each listed order is watched as its own pair: a repeat would double the work and the alarms.
      ok = false;
      reader.log.error({
        code: 'QB_E_CONFIG_DUPLICATE',
        path: itemPath,
        offset: reader.offset(item),
        expected: `each ${what} id once`,
        found: quote(ref),
        detail: `${what} ${quote(ref)} is listed twice`,
      });
      return;
    }
    seen.add(ref);
    if (!knownSet.has(ref)) {
      ok = false;
      reader.log.error({
        code: 'QB_E_CONFIG_REFERENCE',
        path: itemPath,
        offset: reader.offset(item),
        expected: known.length ? `one of the asset's ${what} ids: ${known.join(', ')}` : `a ${what} id, but the asset defines none`,
        found: quote(ref),
      });
      return;
    }
    ids.push(ref);
  });
  if (ok && ids.length === 0) {
    reader.log.warn({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child(key),
      offset: view.valueOffset(key),
      expected: `at least one ${what} id`,
      found: 'an empty list',
      detail: `empty list: ${key === 'orders' ? 'no order can excite this component, so it is never watched' : 'no sensor carries evidence for this component'}`,
    });
  }
  return ok ? ids : undefined;
}
