/**
 * The interference diagram of one asset: shaft speed across, frequency up; each order a line
 * from the origin (its frequency is multiple x speed / 60), each component's half-power band a
 * horizontal strip with its deadband outlined around it, the operating range and the skip bands
 * as vertical strips, and every crossing marked where the order line meets fn, with its speed
 * band as a bar and whether the separation margin is met in words and shape. `qband plan --svg`
 * and the operator page both draw it from here (the page adds the current speed and where each
 * order sits now), through the one renderer.
 */
import type { OrderPosition } from '../advisory/records.ts';
import { skipBandDriveHz, type AssetPlan } from '../physics/assetPlan.ts';
import type { Crossing } from '../physics/crossings.ts';
import { niceTicks, renderFigure, type Chart, type Cursor, type Mark, type MarkerShape, type Series, type SeriesStyle, type Strip } from './svgChart.ts';

export const PLAN_CAUTION =
  "Skip bands are advice for the site's engineers: they change how the process can be run. qband never stops or controls a machine; site procedures, local codes and licensed practice apply.";

/** What the live page adds: the current speed and each order's position against its nearest band. */
export interface LivePoint {
  speedRpm: number | null;
  orders: OrderPosition[];
  /** `component/order` pairs with an active alarm. */
  alarmed: ReadonlySet<string>;
}

const STYLES: SeriesStyle[] = ['solid', 'dashed', 'dotted'];

/** Words and shape of a crossing's verdict. */
export function crossingWords(c: Crossing): { text: string; shape: MarkerShape; abnormal: boolean } {
  switch (c.verdict) {
    case 'inside-range':
      return { text: 'inside the operating range', shape: 'triangle', abnormal: true };
    case 'margin-short':
      return { text: `margin ${c.actualMarginPct.toFixed(1)} % < ${c.requiredMarginPct.toFixed(1)} % required: NOT met`, shape: 'triangle', abnormal: true };
    case 'margin-ok':
      return { text: `margin ${c.actualMarginPct.toFixed(1)} % >= ${c.requiredMarginPct.toFixed(1)} %: met`, shape: 'circle', abnormal: false };
    default:
      return { text: 'AF < 2.5: no margin needed', shape: 'square', abnormal: false };
  }
}

/** The diagram's axes: up to a quarter past the top of the operating range, and the bands crossed there. */
export function diagramAxes(plan: AssetPlan): { xMaxRpm: number; yMaxHz: number } {
  const rangeMax = plan.asset.speed.rangeRpm[1];
  const ticks = niceTicks(0, rangeMax * 1.25);
  const xMaxRpm = ticks[ticks.length - 1] >= rangeMax * 1.1 ? ticks[ticks.length - 1] : rangeMax * 1.25;
  const seen = plan.crossings.filter((c) => c.speedRpm <= xMaxRpm);
  const bandTops = plan.asset.components.filter((k) => seen.some((c) => c.componentId === k.id)).map((k) => k.bandHz[1]);
  const topOrder = Math.max(...plan.asset.orders.map((o) => o.multiple));
  const yMaxHz = bandTops.length > 0 ? Math.max(...bandTops) * 1.15 : (topOrder * xMaxRpm) / 60;
  return { xMaxRpm, yMaxHz };
}

export function interferenceChart(plan: AssetPlan, live?: LivePoint): Chart {
  const { asset } = plan;
  const { xMaxRpm, yMaxHz } = diagramAxes(plan);
  const [rMin, rMax] = asset.speed.rangeRpm;
  const db = asset.alarm.deadbandPct;
  const strips: Strip[] = [{ id: 'operating-range', label: `operating range ${rMin}-${rMax} rpm`, from: rMin, to: rMax, along: 'x', pattern: 'shade' }];
  for (const b of plan.skipBands) {
    const hz = skipBandDriveHz(plan, b);
    strips.push({ id: `skip-${Math.round(b.loRpm)}`, label: `skip ${Math.floor(b.loRpm)}-${Math.ceil(b.hiRpm)} rpm${hz ? ` = drive ${hz[0].toFixed(1)}-${hz[1].toFixed(1)} Hz` : ''} (${b.crossings.join(', ')})`, from: b.loRpm, to: b.hiRpm, along: 'x', pattern: 'hatch-down' });
  }
  const notes: string[] = [];
  for (const k of asset.components) {
    if (k.bandHz[0] > yMaxHz) {
      notes.push(`${k.id} (fn ${k.fnHz} Hz) lies above this chart: no order reaches it below ${Math.round(xMaxRpm)} rpm.`);
      continue;
    }
    strips.push({ id: `band-${k.id}`, label: `${k.id} band ${k.bandHz[0].toFixed(2)}-${k.bandHz[1].toFixed(2)} Hz (fn ${k.fnHz} Hz, Q ${k.q.toFixed(1)})`, from: k.bandHz[0], to: k.bandHz[1], along: 'y', pattern: 'hatch-up' });
    if (db > 0) {
      const w = (k.fnHz * db) / 100;
      strips.push({ id: `deadband-${k.id}`, label: `${k.id} deadband +-${db} % of fn`, from: k.bandHz[0] - w, to: k.bandHz[1] + w, along: 'y', pattern: 'outline' });
    }
  }
  const series: Series[] = asset.orders.map((o, i) => {
    // From the origin to where the line leaves the chart (top or right edge).
    const endRpm = Math.min(xMaxRpm, (yMaxHz * 60) / o.multiple);
    return { id: o.id, label: `${o.id} (${Number(o.multiple.toFixed(4))} x shaft speed)`, points: [[0, 0], [endRpm, (o.multiple * endRpm) / 60]], style: STYLES[i % STYLES.length], tone: 'model', endLabel: true };
  });
  const marks: Mark[] = [];
  for (const c of plan.crossings) {
    if (c.speedRpm > xMaxRpm || c.fnHz > yMaxHz) {
      notes.push(`${c.orderId} x ${c.componentId} crosses at ${Math.round(c.speedRpm)} rpm, beyond this chart: ${crossingWords(c).text}.`);
      continue;
    }
    const w = crossingWords(c);
    marks.push({
      tag: String.fromCharCode(65 + (marks.length % 26)),
      id: `crossing-${c.orderId}-${c.componentId}`,
      x: c.speedRpm,
      y: c.fnHz,
      shape: w.shape,
      tone: w.abnormal ? 'alert' : 'measured',
      span: [c.speedBandRpm[0], c.speedBandRpm[1]],
      label: `${c.orderId} x ${c.componentId} ${Math.round(c.speedRpm)} rpm (${Math.round(c.speedBandRpm[0])}-${Math.round(c.speedBandRpm[1])}): ${w.text}`,
    });
  }
  const cursors: Cursor[] = [];
  const normal = asset.drive?.normalRpm;
  if (normal !== undefined && normal <= xMaxRpm) cursors.push({ id: 'normal', x: normal, label: `normal ${normal} rpm`, tone: 'reference' });
  if (live) {
    const alarmedNow = live.alarmed.size > 0;
    if (live.speedRpm === null) notes.unshift('Speed unknown now: no operating point.');
    else {
      cursors.push({ id: 'now', x: live.speedRpm, label: `now ${live.speedRpm.toFixed(0)} rpm${alarmedNow ? ' - ALARM' : ''}`, tone: alarmedNow ? 'alert' : 'measured' });
      for (const p of live.orders) {
        const order = asset.orders.find((o) => o.id === p.order);
        if (!order) continue;
        const hz = (order.multiple * live.speedRpm) / 60;
        if (hz > yMaxHz) continue;
        const inAlarm = p.nearest_component !== null && live.alarmed.has(`${p.nearest_component}/${p.order}`);
        const where = p.position === 'inside' || p.position === 'deadband' ? `${p.position} ${p.nearest_component}` : p.position === 'outside' && p.separation_pct !== null ? `${p.separation_pct.toFixed(1)} % from ${p.nearest_component}` : p.position;
        marks.push({ id: `now-${p.order}`, tag: `${p.order} now`, x: live.speedRpm, y: hz, shape: p.position === 'inside' ? 'triangle' : 'circle', tone: inAlarm || p.position === 'inside' ? 'alert' : 'measured', label: `${where}${inAlarm ? ' (ALARM)' : ''}` });
      }
    }
  }
  notes.push(`Skip margin: ${plan.marginBasis}. Marks: circle = margin met, square = no margin needed, triangle = inside the range or margin not met; bars = speed bands.`);
  return {
    title: `${asset.id}: interference diagram`,
    x: { label: 'shaft speed', unit: 'rpm', min: 0, max: xMaxRpm },
    y: { label: 'frequency', unit: 'Hz', min: 0, max: yMaxHz },
    heightPx: 440,
    strips,
    series,
    marks,
    cursors,
    notes,
  };
}

/** The plan's picture: one diagram per asset, with the caution at the foot. */
export function planFigure(site: string, plans: AssetPlan[]): string {
  return renderFigure(`${site}: interference diagrams and skip bands`, plans.map((p) => interferenceChart(p)), [PLAN_CAUTION]);
}
