/**
 * Every key of the asset map, declared once: its kind, bounds, allowed words, unit and the
 * sentence an editor shows on hover. The map readers (read*.ts) take their allowed keys and
 * their bounds from here, and `mapSchema.ts` builds the JSON Schema from the same rows, so the
 * validator and the schema cannot drift. A new key is one row here (and, for a key the readers
 * must turn into a field, the line that reads it); docs/asset-map.md describes it for people.
 */
import { MAX_RECORDING_CHANNELS } from '../acquisition/recordingLimits.ts';
import type { NumberRule } from './mapView.ts';
import type { BearingTone } from '../physics/bearingOrders.ts';
import { PRIORITIES, type SensorUnits, type SpeedSource } from './types.ts';

export type KeyKind =
  | 'number'
  | 'id'
  | 'text'
  | 'url'
  | 'word' // one of `oneOf`
  | 'numbers' // a list of `count` numbers, each under `rule`
  | 'powerOfTwo' // an integer power of two under `rule`
  | 'autoOrPowerOfTwo' // 'auto' or an integer power of two under `rule`
  | 'idList'
  | 'block'
  | 'list'; // a non-empty list of `block` items

export interface KeySpec {
  key: string;
  kind: KeyKind;
  description: string;
  unit?: string;
  rule?: NumberRule;
  oneOf?: readonly string[];
  count?: number;
  required?: boolean;
  block?: BlockSpec;
}

export interface BlockSpec {
  title: string;
  keys: readonly KeySpec[];
  /** Exactly one of these keys is given (checked by the reader, expressed by the schema). */
  exactlyOne?: readonly string[];
  /** Never both of these keys together. */
  notBoth?: readonly [string, string];
  /** Each key here needs the others named with it. */
  needs?: Readonly<Record<string, readonly string[]>>;
}

/** Channels are numbered from 0; a recording has at most MAX_RECORDING_CHANNELS. */
export const MAX_CHANNEL = MAX_RECORDING_CHANNELS - 1;
/** No rotating machine qband watches turns faster (common practice: turbo machinery stays below 1e5 rpm). */
export const MAX_SPEED_RPM = 1_000_000;
/** Pulses per revolution of a tach: a toothed wheel has a few hundred at most. */
export const MAX_PULSES_PER_REV = 10_000;
/** FFT frame sizes the spectrum layer accepts (QB_E_FFT_SIZE). */
export const MIN_FRAME_SIZE = 32;
export const MAX_FRAME_SIZE = 4_194_304;
/** Frames in the running average: 1000 frames is minutes of data at any usual setting. */
export const MAX_AVERAGES = 1000;
/** A hop of at least a tenth of a frame: beyond that every sample would start a new FFT. */
export const MAX_OVERLAP = 0.9;
/** The largest decimation the decimator builds (16 half-band stages). */
export const MAX_DECIMATION = 65_536;
/** Decisions at most 100 a second of data, at least one a minute. */
export const MIN_DECISION_STEP_S = 0.01;
export const MAX_DECISION_STEP_S = 60;
/** Below Q = 0.5 (zeta = 1) the mode is not resonant and a half-power band means nothing. */
export const MIN_Q = 0.5;
/** The reorder window the block sequencer accepts at most (QB_E_PAYLOAD_ARGUMENT beyond). */
export const MAX_REORDER_WINDOW = 1024;
/** Samples of one channel in one block: 4 Mi float32 is 16 MiB per message. */
export const MAX_SAMPLES_PER_BLOCK = 4_194_304;
const DAY_S = 86_400;
const YEAR_S = 365 * DAY_S;

export const SPEED_SOURCES = ['tach', 'spectrum', 'topic'] as const satisfies readonly SpeedSource[];
export const SENSOR_UNITS = ['g', 'm/s^2'] as const satisfies readonly SensorUnits[];
export const BEARING_TONES = ['bpfo', 'bpfi', 'bsf', 'ftf'] as const satisfies readonly BearingTone[];

export const BROKER_BLOCK: BlockSpec = {
  title: 'MQTT broker of the live agent',
  keys: [
    { key: 'url', kind: 'url', required: true, description: 'Broker URL, e.g. mqtt://host:1883 or mqtts://host:8883.' },
    { key: 'topic_prefix', kind: 'text', description: "Prefix of every topic qband publishes (default qband); no '+' or '#'." },
  ],
};

export const AGENT_BLOCK: BlockSpec = {
  title: 'Settings of the live agent',
  keys: [
    { key: 'state_every_s', kind: 'number', unit: 's of data time', rule: { ge: 0.1, le: DAY_S }, description: 'Period of the retained state message of each asset (default 1).' },
    { key: 'stale_after_s', kind: 'number', unit: 's of wall time', rule: { gt: 0, le: DAY_S }, description: "Without data for this long, an asset's state says its data is stale (default 5)." },
    { key: 'max_samples_per_block', kind: 'number', unit: 'samples', rule: { integer: true, ge: 1, le: MAX_SAMPLES_PER_BLOCK }, description: 'Larger sample blocks are dropped as oversize (default 262144).' },
    { key: 'reorder_window', kind: 'number', unit: 'blocks', rule: { integer: true, ge: 0, le: MAX_REORDER_WINDOW }, description: 'Blocks held per input topic while a missing sequence number may still arrive (default 4).' },
    { key: 'max_future_s', kind: 'number', unit: 's', rule: { gt: 0, le: DAY_S }, description: "Blocks stamped further ahead of the agent's clock are dropped (default 60)." },
    { key: 'max_past_s', kind: 'number', unit: 's', rule: { gt: 0, le: YEAR_S }, description: "Blocks stamped further behind the agent's clock are dropped (default 604800, 7 days)." },
    { key: 'max_shelve_s', kind: 'number', unit: 's', rule: { gt: 0, le: YEAR_S }, description: 'Longest shelving an operator may ask for (default 86400).' },
    { key: 'session_expiry_s', kind: 'number', unit: 's', rule: { integer: true, ge: 0, le: 4_294_967_295 }, description: "How long the broker keeps the agent's MQTT 5 session after the connection drops (default 86400)." },
    { key: 'max_command_age_s', kind: 'number', unit: 's', rule: { gt: 0, le: DAY_S }, description: 'An operator command issued longer ago than this on arrival is refused (default 300).' },
  ],
};

export const SPEED_BLOCK: BlockSpec = {
  title: 'How shaft speed is known',
  keys: [
    { key: 'source', kind: 'word', oneOf: SPEED_SOURCES, required: true, description: "Where speed comes from: 'tach' (a pulse channel), 'spectrum' (the 1X line of a sensor's vibration) or 'topic' (speed records over MQTT)." },
    { key: 'range_rpm', kind: 'numbers', count: 2, unit: 'rpm', rule: { gt: 0, le: MAX_SPEED_RPM }, required: true, description: 'Operating speed range [min, max], min < max; crossings and margins are measured against it.' },
    { key: 'channel', kind: 'number', rule: { integer: true, ge: 0, le: MAX_CHANNEL }, description: "Recording channel of the tach's pulse train (from 0). Only with source 'tach', where it is required." },
    { key: 'pulses_per_rev', kind: 'number', unit: 'pulses per revolution', rule: { integer: true, ge: 1, le: MAX_PULSES_PER_REV }, description: "Tach pulses per shaft revolution (default 1). Only with source 'tach'." },
    { key: 'sensor', kind: 'id', description: "Sensor whose vibration gives 1X. Only with source 'spectrum', where it is required." },
    { key: 'topic', kind: 'text', description: "MQTT topic of speed records (source 'topic', required) or of the tach's sample blocks (source 'tach', optional)." },
    { key: 'min_confidence', kind: 'number', unit: 'fraction 0..1', rule: { ge: 0, le: 1 }, description: 'Below this, a speed estimate counts as unknown (default 0.6).' },
    { key: 'max_age_s', kind: 'number', unit: 's of data time', rule: { gt: 0, le: 3600 }, description: 'A speed older than this counts as unknown (default 2).' },
  ],
};

const BEARING_BLOCK: BlockSpec = {
  title: 'Rolling bearing geometry',
  keys: [
    { key: 'rolling_elements', kind: 'number', unit: 'elements', rule: { integer: true, ge: 1 }, required: true, description: 'Number of rolling elements.' },
    { key: 'element_diameter', kind: 'number', unit: 'any length unit, the same as pitch_diameter', rule: { gt: 0 }, required: true, description: 'Rolling element diameter d.' },
    { key: 'pitch_diameter', kind: 'number', unit: 'the same length unit as element_diameter', rule: { gt: 0 }, required: true, description: 'Pitch diameter D, larger than d.' },
    { key: 'contact_angle_deg', kind: 'number', unit: 'degrees', rule: { ge: 0, lt: 90 }, description: 'Contact angle (default 0).' },
  ],
};

export const ORDER_BLOCK: BlockSpec = {
  title: 'A forcing order of shaft speed',
  keys: [
    { key: 'id', kind: 'id', required: true, description: 'Order id, unique within the asset (e.g. 1x, vane-pass).' },
    { key: 'multiple', kind: 'number', unit: 'x shaft speed', rule: { gt: 0 }, description: 'The order as a multiple of shaft speed (any positive number).' },
    { key: 'vanes', kind: 'number', unit: 'vanes', rule: { integer: true, ge: 1 }, description: 'Vane pass: number of impeller vanes.' },
    { key: 'blades', kind: 'number', unit: 'blades', rule: { integer: true, ge: 1 }, description: 'Blade pass: number of blades.' },
    { key: 'teeth', kind: 'number', unit: 'teeth', rule: { integer: true, ge: 1 }, description: 'Gear mesh: teeth of a gear on the shaft.' },
    { key: 'bearing', kind: 'block', description: 'Rolling bearing geometry; give the defect tone with tone.', block: BEARING_BLOCK },
    { key: 'tone', kind: 'word', oneOf: BEARING_TONES, description: 'Bearing defect tone: bpfo, bpfi, bsf or ftf. Only with bearing.' },
    { key: 'shaft_ratio', kind: 'number', unit: 'ratio', rule: { gt: 0 }, description: "Speed of the order's own shaft over the reference shaft speed (default 1)." },
  ],
  exactlyOne: ['multiple', 'vanes', 'blades', 'teeth', 'bearing'],
  needs: { bearing: ['tone'], tone: ['bearing'] },
};

export const SENSOR_BLOCK: BlockSpec = {
  title: 'A vibration sensor',
  keys: [
    { key: 'id', kind: 'id', required: true, description: 'Sensor id, unique within the asset.' },
    { key: 'channel', kind: 'number', rule: { integer: true, ge: 0, le: MAX_CHANNEL }, description: 'Recording channel (from 0); none for a sensor fed only over MQTT.' },
    { key: 'units', kind: 'word', oneOf: SENSOR_UNITS, required: true, description: "Units of acceleration after scaling: 'g' or 'm/s^2'." },
    { key: 'scale', kind: 'number', unit: 'units per raw sample', rule: { gt: 0 }, description: 'Multiplier from raw sample to units (default 1). Not with sensitivity_mv_per_unit.' },
    { key: 'sensitivity_mv_per_unit', kind: 'number', unit: 'mV per unit', rule: { gt: 0 }, description: 'For raw samples in volts, instead of scale: scale = 1000 / sensitivity.' },
    { key: 'topic', kind: 'text', description: 'MQTT topic of sample blocks (default <prefix>/<asset>/samples/<sensor id>).' },
  ],
  notBoth: ['scale', 'sensitivity_mv_per_unit'],
};

export const COMPONENT_BLOCK: BlockSpec = {
  title: 'A structural component that can resonate',
  keys: [
    { key: 'id', kind: 'id', required: true, description: 'Component id, unique within the asset.' },
    { key: 'fn_hz', kind: 'number', unit: 'Hz', rule: { gt: 0 }, required: true, description: 'Natural frequency.' },
    { key: 'q', kind: 'number', unit: 'dimensionless', rule: { ge: MIN_Q }, description: 'Quality factor, at least 0.5. Damping is given by exactly one of q, zeta, band_hz.' },
    { key: 'zeta', kind: 'number', unit: 'dimensionless', rule: { gt: 0, lt: 1 }, description: 'Damping ratio, 0 < zeta < 1; Q = 1/(2 zeta).' },
    { key: 'band_hz', kind: 'numbers', count: 2, unit: 'Hz', rule: { gt: 0 }, description: 'Measured half-power band [lo, hi], lo < fn_hz < hi; Q = fn/(hi - lo).' },
    { key: 'orders', kind: 'idList', description: 'Order ids that can excite this component (default: every order of the asset).' },
    { key: 'sensors', kind: 'idList', description: 'Sensor ids whose spectra carry evidence for it (default: every sensor of the asset).' },
  ],
  exactlyOne: ['q', 'zeta', 'band_hz'],
};

export const ALARM_BLOCK: BlockSpec = {
  title: 'Alarm timing and priority',
  keys: [
    { key: 'on_delay_s', kind: 'number', unit: 's', rule: { ge: 0 }, required: true, description: 'Dwell inside the band before the alarm is raised.' },
    { key: 'off_delay_s', kind: 'number', unit: 's', rule: { ge: 0 }, required: true, description: 'Time outside the band (plus deadband) before it clears.' },
    { key: 'deadband_pct', kind: 'number', unit: '% of fn', rule: { ge: 0, lt: 100 }, required: true, description: 'Hysteresis on the band edges for clearing.' },
    { key: 'priority', kind: 'word', oneOf: PRIORITIES, required: true, description: 'Priority when raised: low, medium, high or urgent.' },
    { key: 'escalate_after_s', kind: 'number', unit: 's', rule: { gt: 0 }, description: 'Dwell after raise at which the alarm escalates one step (default 10 x on_delay_s).' },
    { key: 'escalate_growth', kind: 'number', unit: 'ratio', rule: { gt: 1 }, description: 'Growth of the order amplitude over its value at raise that escalates (default 2).' },
  ],
};

export const ANALYSIS_BLOCK: BlockSpec = {
  title: 'Spectrum settings',
  keys: [
    { key: 'frame_size', kind: 'powerOfTwo', unit: 'points', rule: { integer: true, ge: MIN_FRAME_SIZE, le: MAX_FRAME_SIZE }, description: 'Points per FFT frame, a power of two (default 8192).' },
    { key: 'overlap', kind: 'number', unit: 'fraction of a frame', rule: { ge: 0, le: MAX_OVERLAP }, description: 'Share of a frame repeated in the next one (default 0.5).' },
    { key: 'averages', kind: 'number', unit: 'frames', rule: { integer: true, ge: 1, le: MAX_AVERAGES }, description: 'Frames in the running power average (default 4).' },
    { key: 'decimation', kind: 'autoOrPowerOfTwo', unit: 'factor', rule: { integer: true, ge: 1, le: MAX_DECIMATION }, description: "Decimation before the FFT: 'auto' (default) or a power of two (1 = none)." },
    { key: 'decision_step_s', kind: 'number', unit: 's of data time', rule: { ge: MIN_DECISION_STEP_S, le: MAX_DECISION_STEP_S }, description: 'Step of dwell decisions (default 0.1).' },
  ],
};

export const SEVERITY_BLOCK: BlockSpec = {
  title: 'Broadband severity zones',
  keys: [
    { key: 'zone_boundaries_mm_s', kind: 'numbers', count: 3, unit: 'mm/s RMS', rule: { gt: 0 }, required: true, description: 'Velocity boundaries between zones A/B, B/C and C/D, ascending.' },
    { key: 'basis', kind: 'text', required: true, description: 'Where the boundaries come from (standard, machine class), shown with every zone.' },
  ],
};

export const TRANSIENTS_BLOCK: BlockSpec = {
  title: 'Run-ups, coast-downs and drift tolerances',
  keys: [
    { key: 'min_sweep_pct', kind: 'number', unit: '% of top speed', rule: { gt: 0, le: 100 }, description: 'Smallest speed change recorded as a transient (default 10).' },
    { key: 'min_rate_pct_per_s', kind: 'number', unit: '% of top speed per s', rule: { gt: 0, le: 100 }, description: 'Slowest mean rate recorded (default 0.5).' },
    { key: 'hold_s', kind: 'number', unit: 's', rule: { gt: 0, le: 600 }, description: 'Speed steady this long ends a sweep (default 2).' },
    // Order tracks of a sweep are kept in memory until it ends: an hour bounds them.
    { key: 'max_sweep_s', kind: 'number', unit: 's', rule: { ge: 10, le: 3600 }, description: 'Longest sweep kept whole (default 600).' },
    { key: 'drift_fn_pct', kind: 'number', unit: '% of fn', rule: { gt: 0, le: 50 }, description: "A measured fn further than this from the map's draws a drift advisory (default 2)." },
    { key: 'drift_q_pct', kind: 'number', unit: '%', rule: { gt: 0, le: 500 }, description: "A measured Q this far above the map's, or below it by the same factor, draws a drift advisory (default 30)." },
    { key: 'keep', kind: 'number', unit: 'transients', rule: { integer: true, ge: 1, le: 100 }, description: 'Transients the live agent keeps and fits together (default 10).' },
  ],
};

export const DRIVE_BLOCK: BlockSpec = {
  title: 'The variable-speed drive, for skip bands',
  keys: [
    // Induction motors are built with 2 to about 48 poles (common practice); the count is even.
    { key: 'motor_poles', kind: 'number', unit: 'poles', rule: { integer: true, ge: 2, le: 48 }, description: 'Poles of the induction motor: drive output frequency = rpm x poles / (120 (1 - slip)). Even. Not with hz_per_rpm.' },
    { key: 'slip_pct', kind: 'number', unit: '%', rule: { ge: 0, lt: 50 }, description: "The motor's slip at the speeds of interest (default 0); only with motor_poles." },
    { key: 'hz_per_rpm', kind: 'number', unit: 'Hz per rpm', rule: { gt: 0, le: 10 }, description: 'Drive output frequency per rpm of shaft speed, directly (a gearbox or a synchronous motor). Not with motor_poles.' },
    { key: 'normal_rpm', kind: 'number', unit: 'rpm', rule: { gt: 0 }, description: 'Where the machine normally runs; plan warns when it lies inside a skip band.' },
    { key: 'skip_margin_pct', kind: 'number', unit: '% of the crossing speed', rule: { ge: 0, le: 50 }, description: 'Widening of each crossing on each side (default: the alarm deadband plus the speed uncertainty).' },
    { key: 'speed_uncertainty_pct', kind: 'number', unit: '%', rule: { ge: 0, le: 20 }, description: 'Uncertainty of the measured speed (default 0.1 with a tach, 0.5 otherwise).' },
    { key: 'min_usable_pct', kind: 'number', unit: '% of the operating range', rule: { ge: 0, le: 100 }, description: 'Plan warns when the skip bands leave less of the range usable (default 50).' },
  ],
};

export const SPARKPLUG_BLOCK: BlockSpec = {
  title: 'Sparkplug B output of the live agent',
  keys: [
    { key: 'group_id', kind: 'id', required: true, description: 'Sparkplug group id: the first level of the spBv1.0 topics, shared by the edge nodes of one plant area.' },
    { key: 'edge_node_id', kind: 'id', required: true, description: "Sparkplug edge node id of this agent, unique in its group; each asset is a device under it." },
    { key: 'min_data_interval_s', kind: 'number', unit: 's of wall time', rule: { ge: 0, le: 3600 }, description: "Least time between two data messages of one device; the latest state within it is sent (default 1)." },
  ],
};

export const ASSET_BLOCK: BlockSpec = {
  title: 'A machine',
  keys: [
    { key: 'id', kind: 'id', required: true, description: 'Asset id, unique among the assets; used in topics.' },
    { key: 'description', kind: 'text', description: 'Shown in reports.' },
    { key: 'procedure', kind: 'text', description: "The site procedure that governs this machine's vibration response; every advisory defers to it." },
    { key: 'speed', kind: 'block', required: true, description: 'How shaft speed is known.', block: SPEED_BLOCK },
    { key: 'orders', kind: 'list', required: true, description: 'Forcing orders of shaft speed.', block: ORDER_BLOCK },
    { key: 'sensors', kind: 'list', required: true, description: 'Vibration sensors.', block: SENSOR_BLOCK },
    { key: 'components', kind: 'list', required: true, description: 'Structural components that can resonate.', block: COMPONENT_BLOCK },
    { key: 'alarm', kind: 'block', required: true, description: 'Alarm timing and priority.', block: ALARM_BLOCK },
    { key: 'analysis', kind: 'block', description: 'Spectrum settings.', block: ANALYSIS_BLOCK },
    { key: 'severity', kind: 'block', description: 'Broadband severity zones.', block: SEVERITY_BLOCK },
    { key: 'transients', kind: 'block', description: 'When a speed change is recorded as a run-up or coast-down; drift tolerances.', block: TRANSIENTS_BLOCK },
    { key: 'drive', kind: 'block', description: 'The variable-speed drive: how its output frequency relates to shaft speed, and how plan widens skip bands.', block: DRIVE_BLOCK },
  ],
};

export const MAP_BLOCK: BlockSpec = {
  title: 'qband asset map',
  keys: [
    { key: 'site', kind: 'id', required: true, description: 'Name of the site; used in topics and logs.' },
    { key: 'broker', kind: 'block', description: 'MQTT broker for the live agent.', block: BROKER_BLOCK },
    { key: 'agent', kind: 'block', description: 'Settings of the live agent.', block: AGENT_BLOCK },
    { key: 'assets', kind: 'list', required: true, description: 'The machines.', block: ASSET_BLOCK },
    { key: 'sparkplug', kind: 'block', description: 'Sparkplug B output of the live agent (off without this block): the agent as an edge node, each asset a device.', block: SPARKPLUG_BLOCK },
  ],
};

/** The key names of a block, as the reader's allowed keys. */
export function keysOf(block: BlockSpec): readonly string[] {
  return block.keys.map((k) => k.key);
}

export function specOf(block: BlockSpec, key: string): KeySpec {
  const spec = block.keys.find((k) => k.key === key);
  if (!spec) throw new Error(`no key '${key}' in the map's ${block.title} block`);
  return spec;
}

/** The bounds of a number key, as the reader checks them. */
export function ruleOf(block: BlockSpec, key: string): NumberRule {
  const rule = specOf(block, key).rule;
  if (!rule) throw new Error(`key '${key}' of the ${block.title} block has no number rule`);
  return rule;
}

/** The words a word key allows. */
export function wordsOf(block: BlockSpec, key: string): readonly string[] {
  const words = specOf(block, key).oneOf;
  if (!words) throw new Error(`key '${key}' of the ${block.title} block is not a word key`);
  return words;
}
