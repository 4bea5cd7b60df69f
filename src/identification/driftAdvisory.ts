/**
 * The drift advisory: where the band measured on the machine differs from the map's by more
 * than the asset's tolerance, say so, show the map lines to change and what the change does to
 * each crossing of the operating range. qband never edits the map: an engineer confirms the
 * measurement (another run-up, an impact test) and edits it.
 */
import type { AssetConfig, ComponentConfig } from '../config/types.ts';
import { ADVISORY_NOTICE } from '../advisory/records.ts';
import { velocityHalfPowerBand } from '../physics/halfPowerBand.ts';
import type { DriftAdvisory, IdentifiedRecord } from './identifiedRecord.ts';

/** Where a component's fn and damping are written in the map file (see config/mapLines.ts). */
export interface ComponentLines {
  /** 1-based line and its text for each key present (fn_hz, q, zeta or band_hz), with the value's columns. */
  keys: Array<{ key: string; line: number; text: string; valueFrom: number; valueTo: number }>;
}

const IDENTIFY_CAUTION =
  'Identification advises: confirm the measured band (another run-up, an impact test) before editing the map; a band measured on one mode shape at one sensor is not a safety case.';

function fmt(v: number, digits = 3): string {
  return Number(v.toPrecision(digits + 1)).toString();
}

/** Fills `drift` and `advice` of an identified record. */
export function adviseDrift(record: IdentifiedRecord, asset: AssetConfig, component: ComponentConfig, lines: ComponentLines | null): IdentifiedRecord {
  const settings = asset.transients;
  const fnShiftPct = ((record.fn_hz - record.map_fn_hz) / record.map_fn_hz) * 100;
  const qRatio = record.q / record.map_q;
  const fnDrift = Math.abs(fnShiftPct) > settings.driftFnPct && (record.map_fn_hz < record.fn_bounds_hz[0] || record.map_fn_hz > record.fn_bounds_hz[1]);
  const qDrift = Math.abs(Math.log(qRatio)) > Math.log(1 + settings.driftQPct / 100) && (record.map_q < record.q_bounds[0] || record.map_q > record.q_bounds[1]);
  if (!fnDrift && !qDrift) {
    return {
      ...record,
      drift: null,
      advice: `The measured band of ${component.id} (fn ${fmt(record.fn_hz)} Hz, Q ${fmt(record.q, 2)}) agrees with the map within the tolerances (fn ${settings.driftFnPct} %, Q ${settings.driftQPct} %). ${IDENTIFY_CAUTION}`,
    };
  }
  const measuredValues: Record<string, string> = {
    fn_hz: fmt(record.fn_hz),
    q: fmt(record.q, 2),
    zeta: fmt(record.zeta, 2),
    band_hz: `[${fmt(record.band_hz[0])}, ${fmt(record.band_hz[1])}]`,
  };
  let yamlNow: string | null = null;
  let yamlMeasured: string;
  let line: number | null = null;
  if (lines && lines.keys.length > 0) {
    // Replace each value in its own line; keys on one line (a flow mapping) are edited together.
    const byLine = new Map<number, { text: string; edits: Array<{ from: number; to: number; value: string }> }>();
    for (const k of lines.keys) {
      const entry = byLine.get(k.line) ?? { text: k.text, edits: [] };
      entry.edits.push({ from: k.valueFrom, to: k.valueTo, value: measuredValues[k.key] ?? '' });
      byLine.set(k.line, entry);
    }
    const nowLines: string[] = [];
    const newLines: string[] = [];
    for (const [n, e] of [...byLine].sort((a, b) => a[0] - b[0])) {
      let text = e.text;
      for (const edit of e.edits.sort((a, b) => b.from - a.from)) text = text.slice(0, edit.from) + edit.value + text.slice(edit.to);
      nowLines.push(`${n}: ${e.text}`);
      newLines.push(`${n}: ${text}`);
    }
    yamlNow = nowLines.join('\n');
    yamlMeasured = newLines.join('\n');
    line = lines.keys[0].line;
  } else {
    const damping = component.dampingGiven === 'band_hz' ? `band_hz: ${measuredValues.band_hz}` : component.dampingGiven === 'zeta' ? `zeta: ${measuredValues.zeta}` : `q: ${measuredValues.q}`;
    yamlMeasured = `fn_hz: ${measuredValues.fn_hz}, ${damping}`;
  }
  const [minRpm, maxRpm] = asset.speed.rangeRpm;
  const crossings = component.orderIds.map((id) => {
    const order = asset.orders.find((o) => o.id === id);
    const multiple = order?.multiple ?? 1;
    const mapBand: [number, number] = [(component.bandHz[0] * 60) / multiple, (component.bandHz[1] * 60) / multiple];
    const newBandHz = velocityHalfPowerBand(record.fn_hz, record.q);
    const measured: [number, number] = [(newBandHz[0] * 60) / multiple, (newBandHz[1] * 60) / multiple];
    const inRange = (b: [number, number]): boolean => b[1] >= minRpm && b[0] <= maxRpm;
    const before = inRange(mapBand);
    const after = inRange(measured);
    const range = `${minRpm}-${maxRpm} rpm`;
    const effect =
      before && !after
        ? `leaves the operating range ${range}: the map alarms at speeds where this order no longer excites the component`
        : !before && after
          ? `moves into the operating range ${range}: the map is silent at speeds ${Math.round(Math.max(measured[0], minRpm))}-${Math.round(Math.min(measured[1], maxRpm))} rpm where the order now excites it`
          : before && after
            ? `stays in the operating range; its speed band moves from ${Math.round(mapBand[0])}-${Math.round(mapBand[1])} to ${Math.round(measured[0])}-${Math.round(measured[1])} rpm`
            : `stays outside the operating range ${range}`;
    return { order: id, speed_band_rpm_map: mapBand, speed_band_rpm_measured: measured, effect };
  });
  const what = [fnDrift ? `fn ${fmt(record.fn_hz)} Hz against the map's ${fmt(record.map_fn_hz)} Hz (${fnShiftPct > 0 ? '+' : ''}${fnShiftPct.toFixed(1)} %)` : null, qDrift ? `Q ${fmt(record.q, 2)} against the map's ${fmt(record.map_q, 2)}` : null]
    .filter(Boolean)
    .join(' and ');
  const drift: DriftAdvisory = {
    fn_shift_pct: fnShiftPct,
    q_ratio: qRatio,
    message: `${component.id} measures ${what}, beyond the tolerance (fn ${settings.driftFnPct} %, Q ${settings.driftQPct} %).`,
    yaml_now: yamlNow,
    yaml_measured: yamlMeasured,
    line,
    crossings,
  };
  return { ...record, drift, advice: `${drift.message} ${IDENTIFY_CAUTION} ${ADVISORY_NOTICE}` };
}
