/**
 * The records qband emits: alarm events, periodic status and the end-of-run summary.
 *
 * These are the JSON shapes written by `qband replay` (one per line) and, with a few fields
 * added, published by the live agent. Field names are snake_case with units in the name; the
 * pinned ones (kind, event, asset, component, order, t_s, speed_rpm) never change.
 */
import type { Priority } from '../config/types.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';

export interface OutsideBandReference {
  /** The same order's velocity amplitude when it last ran outside this band (deadband included). */
  velocity_rms_mm_s: number;
  speed_rpm: number;
  t_s: number;
}

export interface AmplitudeEvidence {
  /** Order amplitude from the averaged spectrum: velocity, RMS of the spectral line, mm/s. */
  velocity_rms_mm_s: number;
  /** The sensor (of those bound to the component) where it is largest. */
  sensor: string;
  /** Measured frequency of the line, Hz (sub-bin interpolated). */
  line_hz: number;
  outside_band: OutsideBandReference | null;
  /** velocity_rms_mm_s / outside_band.velocity_rms_mm_s, when there is a reference. */
  ratio_to_outside: number | null;
}

export interface AlarmRecord {
  kind: 'alarm';
  event: 'raise' | 'escalate' | 'clear';
  asset: string;
  component: string;
  order: string;
  /** Event time: seconds from the recording's start (replay) or epoch seconds (live). */
  t_s: number;
  speed_rpm: number | null;
  order_hz: number | null;
  fn_hz: number;
  q: number;
  /** Velocity half-power band of the component, Hz. */
  band_hz: [number, number];
  /** Shaft speeds that put this order in the band, rpm: the speeds to move away from. */
  speed_band_rpm: [number, number];
  /** Seconds since the order entered the band (clear: from entering to leaving). */
  dwell_s: number;
  /** Response cycles at the order frequency accumulated inside the band in this dwell. */
  cycles: number;
  priority: Priority;
  escalation: number;
  /** Why it escalated: 'dwell' (time) or 'growth' (measured amplitude); null otherwise. */
  reason: 'dwell' | 'growth' | null;
  amplitude: AmplitudeEvidence | null;
  procedure: string;
  advice: string;
}

export interface OrderPosition {
  order: string;
  order_hz: number | null;
  /** The component band nearest this order (among components it can excite). */
  nearest_component: string | null;
  position: 'inside' | 'deadband' | 'outside' | 'unknown';
  /** Distance from that band in percent of its fn; 0 inside. */
  separation_pct: number | null;
}

export interface ExposureEntry {
  component: string;
  seconds_in_band: number;
  cycles: number;
}

export interface SeverityEntry {
  sensor: string;
  /** Broadband velocity RMS over the severity band (normally 10 to 1000 Hz), mm/s. */
  velocity_rms_mm_s: number;
  zone: 'A' | 'B' | 'C' | 'D';
  /** Where the zone boundaries come from (the map's severity.basis, or the default's caveat): never a zone without it. */
  zone_basis: string;
  band_hz: [number, number];
}

export interface ActiveAlarmEntry {
  component: string;
  order: string;
  priority: Priority;
  dwell_s: number;
  state: 'active' | 'clearing';
}

export interface StatusRecord {
  kind: 'status';
  asset: string;
  t_s: number;
  speed_rpm: number | null;
  speed_source: string | null;
  speed_confidence: number;
  /** 'ok', or why there is no speed: no dwell decisions are taken without one. */
  speed_state: 'ok' | 'no-data' | 'stale' | 'low-confidence';
  orders: OrderPosition[];
  active: ActiveAlarmEntry[];
  exposure: ExposureEntry[];
  severity: SeverityEntry[];
}

export interface SummaryRecord {
  kind: 'summary';
  asset: string;
  duration_s: number;
  events: { raise: number; escalate: number; clear: number };
  still_active: ActiveAlarmEntry[];
  exposure: ExposureEntry[];
  speed: { known_s: number; unknown_s: number; min_rpm: number | null; max_rpm: number | null; source: string };
  severity_max: SeverityEntry[];
  analysis: { sample_rate_hz: number; decimation: number; frame_s: number; bin_hz: number; spectra: number };
  /** Data time with no data on any channel (clocks paused), and spectra spoilt by non-finite samples. */
  data: { outage_s: number; non_finite_spectra: number };
  warnings: string[];
}

export type EngineRecord = AlarmRecord | StatusRecord | TransientRecord;

/** The caution every alarm carries: qband informs; people decide under their own procedures. */
export const ADVISORY_NOTICE =
  'qband advises only and never stops the machine; any response follows the site procedure, local codes and licensed practice.';

export function adviceFor(
  event: AlarmRecord['event'],
  order: string,
  component: string,
  speedBandRpm: [number, number],
  procedure: string,
): string {
  const band = `${Math.round(speedBandRpm[0])}-${Math.round(speedBandRpm[1])} rpm`;
  const what =
    event === 'clear'
      ? `Order ${order} has left the resonance band of ${component}.`
      : `Order ${order} is dwelling in the resonance band of ${component}; running outside ${band} would end the dwell if the process allows.`;
  return `${what} Refer to: ${procedure}. ${ADVISORY_NOTICE}`;
}
