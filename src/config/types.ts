/**
 * The validated, normalised asset map that every other part of qband reads.
 *
 * The YAML file uses snake_case keys (`fn_hz`, `on_delay_s`); validation turns it into these
 * camelCase records with units in every numeric name and every default filled in, so that the
 * engine never has to guess. Nothing here is optional unless its absence means something.
 */

import type { TransientSettings } from '../transients/transientSettings.ts';

/** Alarm priority, lowest first (ISA-18.2 uses priorities; the names are ours). */
export const PRIORITIES = ['low', 'medium', 'high', 'urgent'] as const;
export type Priority = (typeof PRIORITIES)[number];

export interface SiteMap {
  site: string;
  broker?: BrokerConfig;
  /** Settings of the live agent; defaults filled in when the map has no `agent:` block. */
  agent: AgentConfig;
  assets: AssetConfig[];
  /** Sparkplug B output of the live agent (src/sparkplug/); absent: off. */
  sparkplug?: SparkplugConfig;
}

export interface SparkplugConfig {
  groupId: string;
  edgeNodeId: string;
  /** Least wall time between two data messages of one device (the latest state wins). */
  minDataIntervalS: number;
}

export interface AgentConfig {
  /** Retained state is published every this many seconds of data time. */
  stateEveryS: number;
  /** Wall-clock seconds without data after which an asset's state says its data is stale. */
  staleAfterS: number;
  /** Largest sample block accepted (samples); bigger ones are dropped as oversize. */
  maxSamplesPerBlock: number;
  /** Blocks held per input topic while waiting for a missing sequence number. */
  reorderWindow: number;
  /** Blocks stamped further ahead of the agent's clock than this (s) are dropped. */
  maxFutureS: number;
  /** Blocks stamped further behind the agent's clock than this (s) are dropped (a sender's clock error). */
  maxPastS: number;
  /** Longest an operator may shelve an alarm (s). */
  maxShelveS: number;
  /**
   * How long the broker keeps the agent's session (its subscriptions and the QoS 1 messages
   * queued for it) after the connection drops, s; MQTT 5 session expiry interval.
   */
  sessionExpiryS: number;
  /** Acknowledge or shelve commands issued longer ago than this (s of wall time) are refused. */
  maxCommandAgeS: number;
}

export interface BrokerConfig {
  url: string;
  topicPrefix: string;
}

export type SpeedSource = 'tach' | 'spectrum' | 'topic';

export interface SpeedConfig {
  source: SpeedSource;
  /** Recording channel carrying the once-per-rev (or n-per-rev) pulse; `tach` only. */
  channel?: number;
  pulsesPerRev: number;
  /** Operating speed range [min, max] in rpm: where the machine is allowed to run. */
  rangeRpm: [number, number];
  /** Sensor id whose spectrum gives 1X; `spectrum` only. */
  sensor?: string;
  /** MQTT topic of speed records; `topic` only (live agent). */
  topic?: string;
  /** Below this confidence (0..1) a spectral speed estimate counts as unknown. */
  minConfidence: number;
  /** A speed older than this (s of data time) counts as unknown. */
  maxAgeS: number;
}

/** How an order's multiple of shaft speed was defined; kept for reports. */
export type OrderKind =
  | 'multiple'
  | 'vane-pass'
  | 'blade-pass'
  | 'gear-mesh'
  | 'bearing-bpfo'
  | 'bearing-bpfi'
  | 'bearing-bsf'
  | 'bearing-ftf';

export interface OrderConfig {
  id: string;
  /** Frequency of this order divided by the reference shaft's rotation frequency. */
  multiple: number;
  kind: OrderKind;
  /** One line saying how `multiple` was obtained, for `qband check` and alarm evidence. */
  derivation: string;
}

export type SensorUnits = 'g' | 'm/s^2';

export interface SensorConfig {
  id: string;
  /** Recording channel; for a `liveOnly` sensor an internal number above every bound channel. */
  channel: number;
  /** The map gives no recording channel: the sensor is fed over MQTT only (config/internalChannels.ts). */
  liveOnly?: true;
  units: SensorUnits;
  /** Multiplier from raw sample value to `units` (1 when the stream is already in units). */
  scale: number;
  /** MQTT topic of sample blocks (live agent). */
  topic?: string;
}

export type DampingGiven = 'q' | 'zeta' | 'band_hz';

export interface ComponentConfig {
  id: string;
  fnHz: number;
  q: number;
  zeta: number;
  /** Velocity (mobility) half-power band [lo, hi] in Hz; see physics/halfPowerBand.ts. */
  bandHz: [number, number];
  dampingGiven: DampingGiven;
  /** Order ids that can excite this component (all of the asset's orders when omitted in YAML). */
  orderIds: string[];
  /** Sensor ids whose spectra carry evidence for this component (all when omitted). */
  sensorIds: string[];
}

export interface AlarmConfig {
  onDelayS: number;
  offDelayS: number;
  /** Hysteresis on the band edges, in percent of fn: clearing needs the order this far outside. */
  deadbandPct: number;
  priority: Priority;
  /** Dwell after raise at which the alarm escalates one priority step (and again each multiple). */
  escalateAfterS: number;
  /** Growth of the measured order amplitude over its value at raise that escalates (ratio, > 1). */
  escalateGrowth: number;
}

export interface AnalysisConfig {
  /** Points per FFT frame (power of two). */
  frameSize: number;
  /** Fraction of a frame shared with the next one (0 <= overlap < 1). */
  overlap: number;
  /** Number of frames in the running linear power average. */
  averages: number;
  /** Integer decimation before the FFT (1 = none); 'auto' picks it from the map. */
  decimation: number | 'auto';
  /** Step of dwell decisions in data time (s). */
  decisionStepS: number;
}

export interface SeverityConfig {
  /** Broadband velocity RMS boundaries A/B, B/C, C/D in mm/s. */
  zoneBoundariesMmS: [number, number, number];
  /** Where the boundaries come from, printed with every zone. */
  basis: string;
}

/** The asset's drive and operating point, for `qband plan`'s skip bands (map block `drive:`). */
export interface DriveConfig {
  /** Motor poles and slip at the operating point: drive Hz = rpm * poles / (120 (1 - slip)). */
  motor?: { poles: number; slipPct: number };
  /** Drive output frequency per shaft rpm, given directly. */
  hzPerRpm?: number;
  /** The speed the process normally runs at, rpm. */
  normalRpm?: number;
  /** Widening of each crossing's speed band on each side, percent of the crossing speed (default: alarm deadband + speed uncertainty). */
  skipMarginPct?: number;
  /** Uncertainty of the speed measurement, percent (default by speed source). */
  speedUncertaintyPct?: number;
  /** Plan warns when less than this share of the operating range stays usable, percent. */
  minUsablePct: number;
}

export interface AssetConfig {
  /** When a speed change counts as a transient, and identification's drift tolerances. */
  transients: TransientSettings;
  /** Present when the map has a `drive:` block. */
  drive?: DriveConfig;
  id: string;
  description: string;
  procedure: string;
  speed: SpeedConfig;
  orders: OrderConfig[];
  sensors: SensorConfig[];
  components: ComponentConfig[];
  alarm: AlarmConfig;
  analysis: AnalysisConfig;
  severity: SeverityConfig;
}
