/**
 * The records the engine emits, built from its parts: alarm records with their amplitude
 * evidence, status records (speed, where each order stands, active alarms, exposure, severity)
 * and the end-of-run summary.
 */
import {
  adviceFor,
  type ActiveAlarmEntry,
  type AlarmRecord,
  type AmplitudeEvidence,
  type ExposureEntry,
  type OrderPosition,
  type StatusRecord,
  type SummaryRecord,
} from '../advisory/records.ts';
import type { AssetConfig } from '../config/types.ts';
import { bandPosition, separationPct } from '../detection/bandPosition.ts';
import type { DwellEvent } from '../detection/dwellAlarm.ts';
import type { Exposure } from '../detection/exposure.ts';
import type { SpeedAt } from '../manipulation/speedTrack.ts';
import type { DecisionProgress } from './engineSnapshot.ts';
import type { PairState } from './pairState.ts';
import type { SensorAnalysis } from './sensorAnalysis.ts';

/**
 * Decision times are start + k x step in floating point; records carry them rounded to the
 * microsecond so that 55.900000000000006 reads 55.9 (a microsecond is far below any delay).
 */
export function roundTimeS(tS: number): number {
  return Math.round(tS * 1e6) / 1e6;
}

/** The pair's latest order amplitude from the loudest of its component's sensors, with its reference outside the band. */
export function pairEvidence(pair: PairState, sensorsById: ReadonlyMap<string, SensorAnalysis>): AmplitudeEvidence | null {
  let best: SensorAnalysis | null = null;
  for (const id of pair.component.sensorIds) {
    const s = sensorsById.get(id);
    if (!s) continue;
    const a = s.orderAmplitude[pair.orderIndex];
    if (Number.isFinite(a) && (!best || a > best.orderAmplitude[pair.orderIndex])) best = s;
  }
  if (!best) return null;
  const amplitude = best.orderAmplitude[pair.orderIndex];
  const ref = pair.outside;
  return {
    velocity_rms_mm_s: amplitude,
    sensor: best.config.id,
    line_hz: best.orderLineHz[pair.orderIndex],
    outside_band: ref,
    ratio_to_outside: ref && ref.velocity_rms_mm_s > 0 ? amplitude / ref.velocity_rms_mm_s : null,
  };
}

export function alarmRecord(
  asset: AssetConfig,
  pair: PairState,
  e: DwellEvent,
  speedRpm: number | null,
  orderHz: number | null,
  evidence: AmplitudeEvidence | null,
): AlarmRecord {
  const c = pair.component;
  return {
    kind: 'alarm',
    event: e.event,
    asset: asset.id,
    component: c.id,
    order: pair.order.id,
    t_s: roundTimeS(e.tS),
    speed_rpm: speedRpm,
    order_hz: orderHz,
    fn_hz: c.fnHz,
    q: c.q,
    band_hz: [c.bandHz[0], c.bandHz[1]],
    speed_band_rpm: pair.speedBandRpm,
    dwell_s: e.dwellS,
    cycles: pair.cyclesInDwell,
    priority: e.priority,
    escalation: e.escalation,
    reason: e.reason,
    amplitude: evidence,
    procedure: asset.procedure,
    advice: adviceFor(e.event, pair.order.id, c.id, pair.speedBandRpm, asset.procedure),
  };
}

/** Each order against its nearest band at this speed. */
function orderPositions(asset: AssetConfig, pairs: readonly PairState[], speedRpm: number | null): OrderPosition[] {
  return asset.orders.map((order) => {
    const orderHz = speedRpm === null ? null : (order.multiple * speedRpm) / 60;
    let nearest: PairState | null = null;
    let nearestPct = Number.POSITIVE_INFINITY;
    for (const pair of pairs) {
      if (pair.order.id !== order.id || orderHz === null) continue;
      const pct = separationPct(orderHz, pair.component.bandHz, pair.component.fnHz);
      if (pct < nearestPct) {
        nearest = pair;
        nearestPct = pct;
      }
    }
    return {
      order: order.id,
      order_hz: orderHz,
      nearest_component: nearest?.component.id ?? null,
      position: nearest ? bandPosition(orderHz, nearest.component.bandHz, nearest.deadbandHz) : 'unknown',
      separation_pct: nearest ? nearestPct : null,
    };
  });
}

function activeAlarms(pairs: readonly PairState[], tS: number): ActiveAlarmEntry[] {
  return pairs
    .filter((p) => p.alarm.isActive)
    .map((p) => ({
      component: p.component.id,
      order: p.order.id,
      priority: p.alarm.priority,
      dwell_s: p.alarm.dwellS(tS) ?? 0,
      state: p.alarm.state as 'active' | 'clearing',
    }));
}

function exposureEntries(exposures: ReadonlyMap<string, Exposure>): ExposureEntry[] {
  return [...exposures].map(([component, e]) => ({
    component,
    seconds_in_band: e.secondsInBand,
    cycles: e.cycles,
  }));
}

/** The parts of the engine that status and summary records read. */
export interface RecordSources {
  asset: AssetConfig;
  pairs: readonly PairState[];
  exposures: ReadonlyMap<string, Exposure>;
  sensors: readonly SensorAnalysis[];
}

export function statusRecord(src: RecordSources, tS: number, speed: SpeedAt, speedSource: string): StatusRecord {
  return {
    kind: 'status',
    asset: src.asset.id,
    t_s: roundTimeS(tS),
    speed_rpm: speed.rpm,
    speed_source: speedSource,
    speed_confidence: speed.confidence,
    speed_state: speed.reason,
    orders: orderPositions(src.asset, src.pairs, speed.rpm),
    active: activeAlarms(src.pairs, tS),
    exposure: exposureEntries(src.exposures),
    severity: src.sensors.flatMap((s) => (s.severity ? [s.severity] : [])),
  };
}

export interface RunFacts {
  speedSource: string;
  analysis: SummaryRecord['analysis'];
  nonFiniteSpectra: number;
  warnings: readonly string[];
}

export function summaryRecord(src: RecordSources, progress: DecisionProgress, facts: RunFacts): SummaryRecord {
  const tS = progress.lastDecisionS ?? progress.startS ?? 0;
  const stats = progress.speedStats;
  return {
    kind: 'summary',
    asset: src.asset.id,
    duration_s: progress.startS === null ? 0 : tS - progress.startS,
    events: { ...progress.counts },
    still_active: activeAlarms(src.pairs, tS),
    exposure: exposureEntries(src.exposures),
    speed: {
      known_s: stats.knownS,
      unknown_s: stats.unknownS,
      min_rpm: Number.isFinite(stats.minRpm) ? stats.minRpm : null,
      max_rpm: Number.isFinite(stats.maxRpm) ? stats.maxRpm : null,
      source: facts.speedSource,
    },
    severity_max: src.sensors.flatMap((s) => (s.severityMax ? [s.severityMax] : [])),
    analysis: facts.analysis,
    data: { outage_s: progress.outageS, non_finite_spectra: facts.nonFiniteSpectra },
    warnings: [...facts.warnings],
  };
}
