/**
 * One readable line per engine record, for people watching a terminal (`--format text`).
 * The JSON lines stay the interface for programs; this is only a view of them.
 */
import type { TransientRecord } from '../transients/transientRecord.ts';
import { zoneBasisText } from '../advisory/zoneBasisText.ts';
import type { AlarmRecord, EngineRecord, StatusRecord, SummaryRecord } from '../advisory/records.ts';

const EVENT_WORD: Record<AlarmRecord['event'], string> = {
  raise: 'ALARM RAISED',
  escalate: 'ALARM ESCALATED',
  clear: 'alarm cleared',
};

function time(tS: number): string {
  return `${tS.toFixed(1).padStart(7)} s`;
}

function rpm(speedRpm: number | null): string {
  return speedRpm === null ? 'speed unknown' : `${speedRpm.toFixed(0)} rpm`;
}

export function alarmLine(r: AlarmRecord): string {
  const band = `${r.band_hz[0].toFixed(2)}-${r.band_hz[1].toFixed(2)} Hz`;
  const at = r.order_hz === null ? '' : ` at ${r.order_hz.toFixed(2)} Hz`;
  let evidence = '';
  if (r.amplitude) {
    evidence = `; ${r.order} measures ${r.amplitude.velocity_rms_mm_s.toFixed(2)} mm/s RMS`;
    if (r.amplitude.outside_band && r.amplitude.ratio_to_outside !== null) {
      evidence += ` (${r.amplitude.ratio_to_outside.toFixed(1)} x its ${r.amplitude.outside_band.velocity_rms_mm_s.toFixed(2)} mm/s at ${r.amplitude.outside_band.speed_rpm.toFixed(0)} rpm, outside the band)`;
    }
  }
  const why = r.reason ? `, ${r.reason === 'dwell' ? 'dwell goes on' : 'response grew'}` : '';
  const head = `${time(r.t_s)}  ${EVENT_WORD[r.event]} [${r.priority}${why}] ${r.component} / ${r.order}`;
  if (r.event === 'clear') {
    return `${head}: left the band after ${r.dwell_s.toFixed(1)} s in it, ${r.cycles.toFixed(0)} cycles`;
  }
  return (
    `${head}: order${at} inside ${band} for ${r.dwell_s.toFixed(1)} s at ${rpm(r.speed_rpm)}, ` +
    `${r.cycles.toFixed(0)} cycles${evidence}.\n${' '.repeat(12)}Speeds ${r.speed_band_rpm[0].toFixed(0)}-${r.speed_band_rpm[1].toFixed(0)} rpm keep it there. Advisory only: follow ${r.procedure}.`
  );
}

export function statusLine(r: StatusRecord): string {
  if (r.speed_rpm === null) return `${time(r.t_s)}  ${rpm(null)} (${r.speed_state}): no dwell decisions`;
  const orders = r.orders
    .map((o) => {
      if (o.order_hz === null) return `${o.order} ?`;
      const where =
        o.position === 'inside'
          ? `IN ${o.nearest_component}`
          : o.nearest_component
            ? `${(o.separation_pct ?? 0).toFixed(1)} % from ${o.nearest_component}`
            : 'no band';
      return `${o.order} ${o.order_hz.toFixed(1)} Hz ${where}`;
    })
    .join(' | ');
  const severity = r.severity.map((s) => `${s.sensor} ${s.velocity_rms_mm_s.toFixed(2)} mm/s zone ${s.zone}`).join(', ');
  return `${time(r.t_s)}  ${rpm(r.speed_rpm)} (${r.speed_source})  ${orders}${severity ? `  [${severity}; ${zoneBasisText(r.severity)}]` : ''}`;
}

export function summaryLines(r: SummaryRecord): string {
  const lines = [
    `summary for ${r.asset}: ${r.duration_s.toFixed(1)} s of data; ${r.events.raise} raised, ${r.events.escalate} escalated, ${r.events.clear} cleared; ${r.still_active.length} still active`,
    ...r.exposure.map(
      (e) => `  exposure ${e.component}: ${e.seconds_in_band.toFixed(1)} s in band, ${e.cycles.toFixed(0)} response cycles`,
    ),
    `  speed known for ${r.speed.known_s.toFixed(1)} s, unknown for ${r.speed.unknown_s.toFixed(1)} s (source ${r.speed.source})`,
    ...r.warnings.map((w) => `  warning: ${w}`),
  ];
  return lines.join('\n');
}

/** One line for a run-up or coast-down: when, from and to which speed, what it recorded. */
export function transientLine(r: TransientRecord): string {
  const what = r.direction === 'up' ? 'run-up' : 'coast-down';
  const tracks = r.orders.map((o) => `${o.order}@${o.sensor} ${o.points.length} pts`).join(', ');
  return `${r.t_start_s.toFixed(1)}-${r.t_end_s.toFixed(1)} s  ${what} ${Math.round(r.speed_from_rpm)} -> ${Math.round(r.speed_to_rpm)} rpm (${r.rate_rpm_s.toFixed(0)} rpm/s, ended ${r.ended_by}); recorded ${tracks || 'nothing'}${r.decays.length ? `; ${r.decays.length} decay envelope(s)` : ''}`;
}

export function textLine(r: EngineRecord | SummaryRecord): string {
  if (r.kind === 'alarm') return alarmLine(r);
  if (r.kind === 'status') return statusLine(r);
  if (r.kind === 'transient') return transientLine(r);
  return summaryLines(r);
}
