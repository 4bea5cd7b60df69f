/**
 * Validates an asset map (YAML) and turns it into the normalised SiteMap of types.ts.
 *
 * Every problem of the file is reported in one pass, each with its path in the map, line and
 * column, what was expected and what was found. Unknown keys are errors (a typo must not
 * silently do nothing). Warnings never make a map invalid. The map is returned only when there
 * is no problem at all.
 */
import { readFile } from 'node:fs/promises';
import { isMap, isScalar, isSeq, LineCounter, parseDocument, type Node, type YAMLMap } from 'yaml';
import { QbandError } from '../errors.ts';
import { DEFAULT_ZONE_BASIS, DEFAULT_ZONE_BOUNDARIES_MM_S } from '../manipulation/velocitySeverity.ts';
import { ProblemLog, type ConfigProblem } from './configProblem.ts';
import { assignInternalChannels, type SensorDraft } from './internalChannels.ts';
import { Reader, type MapView } from './mapView.ts';
import { readComponent } from './readComponent.ts';
import { readOrder } from './readOrder.ts';
import {
  PRIORITIES,
  type AgentConfig,
  type AlarmConfig,
  type AnalysisConfig,
  type AssetConfig,
  type BrokerConfig,
  type SensorUnits,
  type SeverityConfig,
  type SiteMap,
  type SpeedConfig,
  type SpeedSource,
} from './types.ts';

export type { ConfigProblem } from './configProblem.ts';

export interface AssetMapResult {
  /** The validated map; null when there is any problem. */
  map: SiteMap | null;
  /** The name given to parseAssetMap (usually the file path), for messages. */
  sourceName: string;
  problems: ConfigProblem[];
  warnings: ConfigProblem[];
}

const TOP_KEYS = ['site', 'broker', 'agent', 'assets'] as const;
const AGENT_KEYS = ['state_every_s', 'stale_after_s', 'max_samples_per_block', 'reorder_window', 'max_future_s', 'max_past_s', 'max_shelve_s', 'session_expiry_s', 'max_command_age_s'] as const;
const BROKER_KEYS = ['url', 'topic_prefix'] as const;
const ASSET_KEYS = [
  'id',
  'description',
  'procedure',
  'speed',
  'orders',
  'sensors',
  'components',
  'alarm',
  'analysis',
  'severity',
] as const;
const SPEED_KEYS = [
  'source',
  'channel',
  'pulses_per_rev',
  'range_rpm',
  'sensor',
  'topic',
  'min_confidence',
  'max_age_s',
] as const;
const SPEED_SOURCES = ['tach', 'spectrum', 'topic'] as const satisfies readonly SpeedSource[];
const SENSOR_KEYS = ['id', 'channel', 'units', 'scale', 'sensitivity_mv_per_unit', 'topic'] as const;
const SENSOR_UNITS = ['g', 'm/s^2'] as const satisfies readonly SensorUnits[];
const ALARM_KEYS = [
  'on_delay_s',
  'off_delay_s',
  'deadband_pct',
  'priority',
  'escalate_after_s',
  'escalate_growth',
] as const;
const ANALYSIS_KEYS = ['frame_size', 'overlap', 'averages', 'decimation', 'decision_step_s'] as const;
const SEVERITY_KEYS = ['zone_boundaries_mm_s', 'basis'] as const;

export const DEFAULT_TOPIC_PREFIX = 'qband';
export const DEFAULT_AGENT: AgentConfig = {
  stateEveryS: 1,
  staleAfterS: 5,
  maxSamplesPerBlock: 262_144,
  reorderWindow: 4,
  maxFutureS: 60,
  maxPastS: 7 * 86_400,
  maxShelveS: 86_400,
  sessionExpiryS: 86_400,
  maxCommandAgeS: 300,
};
export const DEFAULT_MIN_CONFIDENCE = 0.6;
export const DEFAULT_MAX_AGE_S = 2;
export const DEFAULT_ESCALATE_AFTER_ON_DELAYS = 10;
export const DEFAULT_ESCALATE_GROWTH = 2.0;
export const DEFAULT_ANALYSIS: AnalysisConfig = {
  frameSize: 8192,
  overlap: 0.5,
  averages: 4,
  decimation: 'auto',
  decisionStepS: 0.1,
};
export const DEFAULT_SEVERITY: SeverityConfig = {
  zoneBoundariesMmS: [...DEFAULT_ZONE_BOUNDARIES_MM_S],
  basis: DEFAULT_ZONE_BASIS,
};
/** FFT frame sizes the spectrum layer accepts (QB_E_FFT_SIZE). */
const MIN_FRAME_SIZE = 32;
const MAX_FRAME_SIZE = 4194304;

/** Parses and validates asset-map text; `sourceName` names the file in nothing but messages. */
export function parseAssetMap(text: string, sourceName: string): AssetMapResult {
  const lineCounter = new LineCounter();
  const doc = parseDocument(text, { lineCounter, prettyErrors: false, uniqueKeys: true });
  const log = new ProblemLog(lineCounter);

  let structural = false;
  for (const err of doc.errors) {
    const duplicate = err.code === 'DUPLICATE_KEY';
    if (!duplicate) structural = true;
    log.error({
      code: duplicate ? 'QB_E_CONFIG_DUPLICATE' : 'QB_E_CONFIG_SYNTAX',
      path: '',
      offset: err.pos[0],
      expected: duplicate ? 'each key once per mapping' : 'well-formed YAML',
      found: err.code,
      detail: duplicate ? 'a key appears twice in the same mapping' : `YAML syntax: ${firstLine(err.message)}`,
    });
  }
  for (const w of doc.warnings) {
    log.warn({ code: 'QB_E_CONFIG_SYNTAX', path: '', offset: w.pos[0], expected: 'plain YAML', found: w.code, detail: `YAML: ${firstLine(w.message)}` });
  }
  if (structural) return { map: null, sourceName, ...log.sorted() };

  const reader = new Reader(doc, text, log);
  const map = readSite(reader, reader.resolve(doc.contents));
  const sorted = log.sorted();
  return { map: sorted.problems.length === 0 ? (map ?? null) : null, sourceName, ...sorted };
}

/** Reads a map file; a file that cannot be read is a QbandError (QB_E_FILE_READ). */
export async function loadAssetMapFile(path: string): Promise<AssetMapResult> {
  let text: string;
  try {
    text = await readFile(path, 'utf8');
  } catch (cause) {
    const reason = (cause as NodeJS.ErrnoException).code ?? String(cause);
    throw new QbandError('QB_E_FILE_READ', `cannot read asset map '${path}' (${reason})`, { cause });
  }
  return parseAssetMap(text, path);
}

function firstLine(s: string): string {
  return s.split('\n')[0].replace(/ at line \d+, column \d+:?$/, '');
}

function readSite(reader: Reader, root: Node | null): SiteMap | undefined {
  if (!isMap(root)) {
    reader.log.error({
      code: 'QB_E_CONFIG_TYPE',
      path: '',
      offset: reader.offset(root),
      expected: 'a mapping with site and assets',
      found: reader.describe(root),
      detail: `the map must be a mapping with 'site' and 'assets', got ${reader.describe(root)}`,
    });
    return undefined;
  }
  const top = reader.map(root, '', TOP_KEYS)!;
  const site = top.text('site', { id: true });
  const broker = top.has('broker') ? readBroker(reader, top) : undefined;
  const agent = top.has('agent') ? readAgent(reader, top) : { ...DEFAULT_AGENT };
  const assets = readList(reader, top, 'assets', 'a list of assets', (node, path) => readAsset(reader, node, path));
  checkInputTopics(reader, top);
  if (site === undefined || assets === undefined || agent === undefined || (top.has('broker') && broker === undefined)) return undefined;
  return broker ? { site, broker, agent, assets } : { site, agent, assets };
}

function readAgent(reader: Reader, top: MapView): AgentConfig | undefined {
  const view = reader.map(top.get('agent') ?? null, 'agent', AGENT_KEYS, top.keyOffset('agent'));
  if (!view) return undefined;
  const d = DEFAULT_AGENT;
  const stateEveryS = view.number('state_every_s', { gt: 0 }, d.stateEveryS);
  const staleAfterS = view.number('stale_after_s', { gt: 0 }, d.staleAfterS);
  const maxSamplesPerBlock = view.number('max_samples_per_block', { integer: true, ge: 1 }, d.maxSamplesPerBlock);
  const reorderWindow = view.number('reorder_window', { integer: true, ge: 0 }, d.reorderWindow);
  const maxFutureS = view.number('max_future_s', { gt: 0 }, d.maxFutureS);
  const maxPastS = view.number('max_past_s', { gt: 0 }, d.maxPastS);
  const maxShelveS = view.number('max_shelve_s', { gt: 0 }, d.maxShelveS);
  // MQTT 5 carries the session expiry as a four-byte interval (0xFFFFFFFF = never).
  const sessionExpiryS = view.number('session_expiry_s', { integer: true, ge: 0, le: 4_294_967_295 }, d.sessionExpiryS);
  const maxCommandAgeS = view.number('max_command_age_s', { gt: 0 }, d.maxCommandAgeS);
  if (
    stateEveryS === undefined ||
    staleAfterS === undefined ||
    maxSamplesPerBlock === undefined ||
    reorderWindow === undefined ||
    maxFutureS === undefined ||
    maxPastS === undefined ||
    maxShelveS === undefined ||
    sessionExpiryS === undefined ||
    maxCommandAgeS === undefined
  ) {
    return undefined;
  }
  return { stateEveryS, staleAfterS, maxSamplesPerBlock, reorderWindow, maxFutureS, maxPastS, maxShelveS, sessionExpiryS, maxCommandAgeS };
}

function readBroker(reader: Reader, top: MapView): BrokerConfig | undefined {
  const view = reader.map(top.get('broker') ?? null, 'broker', BROKER_KEYS, top.keyOffset('broker'));
  if (!view) return undefined;
  const url = view.text('url');
  const topicPrefix = view.text('topic_prefix', { fallback: DEFAULT_TOPIC_PREFIX });
  if (url !== undefined && !isUrl(url)) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: 'broker.url',
      offset: view.valueOffset('url'),
      expected: 'a URL such as mqtt://host:1883',
      found: `'${url}'`,
    });
    return undefined;
  }
  if (topicPrefix !== undefined && /[+#]/.test(topicPrefix)) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: 'broker.topic_prefix',
      offset: view.valueOffset('topic_prefix'),
      expected: "a topic prefix without MQTT wildcards '+' or '#'",
      found: `'${topicPrefix}'`,
    });
    return undefined;
  }
  return url !== undefined && topicPrefix !== undefined ? { url, topicPrefix } : undefined;
}

function isUrl(s: string): boolean {
  try {
    return new URL(s).host !== '';
  } catch {
    return false;
  }
}

/**
 * Reads a required, non-empty list with `read` per item and checks that item ids are unique.
 * Returns the items only when every one of them was read.
 */
function readList<T extends { id: string }>(
  reader: Reader,
  parent: MapView,
  key: string,
  expected: string,
  read: (node: Node | null, path: string) => { id?: string; item?: T; offset?: number },
  ids?: string[],
): T[] | undefined {
  if (!parent.has(key)) return parent.missing(key, expected);
  const listNode = parent.present(key, expected);
  if (!listNode) return undefined;
  const path = parent.child(key);
  const items = reader.list(listNode, path, expected);
  if (!items) return undefined;
  if (items.length === 0) {
    reader.log.error({ code: 'QB_E_CONFIG_RANGE', path, offset: reader.offset(listNode), expected: `${expected}, at least one`, found: 'an empty list' });
    return undefined;
  }
  const out: T[] = [];
  const seen = new Map<string, string>();
  let ok = true;
  items.forEach((node, i) => {
    const itemPath = `${path}[${i}]`;
    const { id, item } = read(node, itemPath);
    if (id !== undefined) {
      const first = seen.get(id);
      if (first !== undefined) {
        ok = false;
        reader.log.error({
          code: 'QB_E_CONFIG_DUPLICATE',
          path: `${itemPath}.id`,
          offset: idOffset(reader, node),
          expected: 'an id not used before in this list',
          found: `'${id}'`,
          detail: `id '${id}' is already used by ${first}`,
        });
      } else {
        seen.set(id, itemPath);
        ids?.push(id);
      }
    }
    if (item === undefined) ok = false;
    else out.push(item);
  });
  return ok ? out : undefined;
}

function idOffset(reader: Reader, node: Node | null): number | undefined {
  if (isMap(node)) {
    const pair = node.items.find((p) => (p.key as { value?: unknown } | null)?.value === 'id');
    const value = pair?.value as Node | undefined;
    if (value?.range) return value.range[0];
  }
  return reader.offset(node);
}

function readAsset(reader: Reader, node: Node | null, path: string): { id?: string; item?: AssetConfig } {
  const view = reader.map(node, path, ASSET_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  const description = view.text('description', { fallback: '' });
  const procedure = view.text('procedure', { fallback: '' });
  if (!view.has('procedure')) {
    reader.log.warn({
      code: 'QB_E_CONFIG_MISSING',
      path: view.child('procedure'),
      offset: view.offset,
      expected: "the site procedure that governs this machine's vibration response",
      found: 'nothing',
      detail: 'no procedure named: advisories for this asset will defer to site procedures in general',
    });
  }

  // Sensors and orders first: components and the speed source refer to them by id.
  const sensorIds: string[] = [];
  const drafts = readList(reader, view, 'sensors', 'a list of sensors', (n, p) => {
    const r = readSensor(reader, n, p);
    return { id: r.id, item: r.sensor };
  }, sensorIds);
  const orderIds: string[] = [];
  const orders = readList(reader, view, 'orders', 'a list of orders', (n, p) => {
    const r = readOrder(reader, n, p);
    return { id: r.id, item: r.order };
  }, orderIds);
  const speed = view.has('speed')
    ? readSpeed(reader, view, sensorIds)
    : view.missing('speed', 'a mapping with source and range_rpm');
  const sensors = drafts && assignInternalChannels(drafts, speed);
  const components = readList(reader, view, 'components', 'a list of components', (n, p) => {
    const r = readComponent(reader, n, p, { orderIds, sensorIds });
    return { id: r.id, item: r.component };
  });
  const alarm = view.has('alarm') ? readAlarm(reader, view) : view.missing('alarm', 'a mapping with on_delay_s, off_delay_s, deadband_pct, priority');
  const analysis = view.has('analysis') ? readAnalysis(reader, view) : { ...DEFAULT_ANALYSIS };
  const severity = view.has('severity') ? readSeverity(reader, view) : { ...DEFAULT_SEVERITY, zoneBoundariesMmS: [...DEFAULT_SEVERITY.zoneBoundariesMmS] as [number, number, number] };
  checkChannels(reader, view);

  if (
    id === undefined ||
    description === undefined ||
    procedure === undefined ||
    !speed ||
    !orders ||
    !sensors ||
    !components ||
    !alarm ||
    !analysis ||
    !severity
  ) {
    return { id };
  }
  return { id, item: { id, description, procedure, speed, orders, sensors, components, alarm, analysis, severity } };
}

function readSensor(reader: Reader, node: Node | null, path: string): { id?: string; sensor?: SensorDraft } {
  const view = reader.map(node, path, SENSOR_KEYS);
  if (!view) return {};
  const id = view.text('id', { id: true });
  // Optional: a sensor fed only over MQTT has no recording channel (config/internalChannels.ts).
  const channel = view.has('channel') ? view.number('channel', { integer: true, ge: 0 }) : null;
  const units = view.text('units', { oneOf: SENSOR_UNITS }) as SensorUnits | undefined;
  const topic = view.has('topic') ? view.text('topic') : undefined;
  let scale: number | undefined = 1;
  if (view.has('scale') && view.has('sensitivity_mv_per_unit')) {
    reader.log.error({
      code: 'QB_E_CONFIG_CONFLICT',
      path: view.child('sensitivity_mv_per_unit'),
      offset: view.keyOffset('sensitivity_mv_per_unit'),
      expected: 'exactly one of scale, sensitivity_mv_per_unit',
      found: "'scale' and 'sensitivity_mv_per_unit'",
      detail: "conflicts with 'scale': give the multiplier or the sensitivity, not both",
    });
    scale = undefined;
  } else if (view.has('sensitivity_mv_per_unit')) {
    // Raw samples in volts: units = volts * 1000 / (mV per unit).
    const mvPerUnit = view.number('sensitivity_mv_per_unit', { gt: 0 });
    scale = mvPerUnit === undefined ? undefined : 1000 / mvPerUnit;
  } else {
    scale = view.number('scale', { gt: 0 }, 1);
  }
  if (view.has('topic') && topic === undefined) return { id };
  if (id === undefined || channel === undefined || units === undefined || scale === undefined) return { id };
  const sensor: SensorDraft = { id, units, scale, ...(channel === null ? {} : { channel }), ...(topic === undefined ? {} : { topic }) };
  return { id, sensor };
}

function readSpeed(reader: Reader, asset: MapView, sensorIds: readonly string[]): SpeedConfig | undefined {
  const view = reader.map(asset.get('speed') ?? null, asset.child('speed'), SPEED_KEYS, asset.keyOffset('speed'));
  if (!view) return undefined;
  const source = view.text('source', { oneOf: SPEED_SOURCES }) as SpeedSource | undefined;
  const range = view.numbers('range_rpm', 2, { gt: 0 });
  let rangeRpm: [number, number] | undefined;
  if (range) {
    if (range[0] < range[1]) rangeRpm = [range[0], range[1]];
    else {
      reader.log.error({
        code: 'QB_E_CONFIG_RANGE',
        path: view.child('range_rpm'),
        offset: view.valueOffset('range_rpm'),
        expected: '[min, max] with min < max',
        found: `[${range[0]}, ${range[1]}]`,
      });
    }
  }
  const minConfidence = view.number('min_confidence', { ge: 0, le: 1 }, DEFAULT_MIN_CONFIDENCE);
  const maxAgeS = view.number('max_age_s', { gt: 0 }, DEFAULT_MAX_AGE_S);

  // Keys that belong to one source only: elsewhere they would silently do nothing.
  const owner: Record<'channel' | 'pulses_per_rev' | 'sensor' | 'topic', SpeedSource[]> = {
    channel: ['tach'],
    pulses_per_rev: ['tach'],
    sensor: ['spectrum'],
    topic: ['topic', 'tach'],
  };
  for (const [key, sources] of Object.entries(owner)) {
    if (source !== undefined && !sources.includes(source) && view.has(key)) {
      view.notApplicable(key, `'${key}' is used with source ${sources.map((x) => `'${x}'`).join(' or ')} only`);
    }
  }
  let channel: number | undefined;
  let pulsesPerRev: number | undefined = 1;
  let sensor: string | undefined;
  let topic: string | undefined;
  let ok = source !== undefined;
  if (source === 'tach') {
    channel = view.number('channel', { integer: true, ge: 0 });
    pulsesPerRev = view.number('pulses_per_rev', { integer: true, ge: 1 }, 1);
    // Live agent: the tach pulse blocks arrive on this topic (default <prefix>/<asset>/samples/tach).
    if (view.has('topic')) topic = view.text('topic');
    ok &&= channel !== undefined && pulsesPerRev !== undefined && (topic !== undefined || !view.has('topic'));
  } else if (source === 'spectrum') {
    sensor = view.text('sensor', { id: true });
    if (sensor !== undefined && !sensorIds.includes(sensor)) {
      reader.log.error({
        code: 'QB_E_CONFIG_REFERENCE',
        path: view.child('sensor'),
        offset: view.valueOffset('sensor'),
        expected: sensorIds.length ? `one of the asset's sensor ids: ${sensorIds.join(', ')}` : 'a sensor id, but the asset defines none',
        found: `'${sensor}'`,
      });
      sensor = undefined;
    }
    ok &&= sensor !== undefined;
  } else if (source === 'topic') {
    topic = view.text('topic');
    ok &&= topic !== undefined;
  }
  if (!ok || !rangeRpm || minConfidence === undefined || maxAgeS === undefined || pulsesPerRev === undefined) return undefined;
  const speed: SpeedConfig = { source: source!, pulsesPerRev, rangeRpm, minConfidence, maxAgeS };
  if (channel !== undefined) speed.channel = channel;
  if (sensor !== undefined) speed.sensor = sensor;
  if (topic !== undefined) speed.topic = topic;
  return speed;
}

/**
 * A recording channel carries one signal: two sensors, or a sensor and the tach, cannot share it.
 * Read from the raw nodes so the check runs even when other fields of the same items are wrong.
 */
function checkChannels(reader: Reader, asset: MapView): void {
  const owners = new Map<number, string>();
  const speedNode = asset.get('speed');
  const tach = isMap(speedNode) && rawValue(reader, speedNode, 'source')?.value === 'tach' ? rawValue(reader, speedNode, 'channel') : undefined;
  if (typeof tach?.value === 'number') owners.set(tach.value, `the tach (${asset.child('speed')}.channel)`);
  const sensorsNode = asset.get('sensors');
  if (!isSeq(sensorsNode)) return;
  sensorsNode.items.forEach((node, i) => {
    const item = reader.resolve(node);
    if (!isMap(item)) return;
    const channel = rawValue(reader, item, 'channel');
    if (typeof channel?.value !== 'number' || !Number.isInteger(channel.value)) return;
    const id = rawValue(reader, item, 'id')?.value;
    const first = owners.get(channel.value);
    if (first !== undefined) {
      reader.log.error({
        code: 'QB_E_CONFIG_DUPLICATE',
        path: `${asset.child('sensors')}[${i}].channel`,
        offset: channel.offset,
        expected: 'a channel that no other sensor or tach of this asset uses',
        found: String(channel.value),
        detail: `channel ${channel.value} is already bound to ${first}`,
      });
    } else {
      owners.set(channel.value, id === undefined ? `${asset.child('sensors')}[${i}]` : `sensor '${String(id)}'`);
    }
  });
}

/** The scalar value under `key` of a raw mapping node, with its offset; undefined when absent. */
/**
 * An input topic carries one stream: two sensors, a sensor and a tach, or a speed topic that
 * is also a sample topic would mix unrelated data, in one asset or across assets. Default
 * topics count too (`<prefix>/<asset>/samples/<sensor>`, `.../samples/tach`).
 */
function checkInputTopics(reader: Reader, top: MapView): void {
  const brokerNode = top.get('broker');
  const rawPrefix = isMap(brokerNode) ? rawValue(reader, brokerNode, 'topic_prefix')?.value : undefined;
  const prefix = typeof rawPrefix === 'string' ? rawPrefix : DEFAULT_TOPIC_PREFIX;
  const assetsNode = top.get('assets');
  if (!isSeq(assetsNode)) return;
  const owners = new Map<string, string>();
  const claim = (topic: string, owner: string, path: string, offset: number | undefined) => {
    const first = owners.get(topic);
    if (first === undefined) {
      owners.set(topic, owner);
      return;
    }
    reader.log.error({
      code: 'QB_E_CONFIG_DUPLICATE',
      path,
      offset,
      expected: 'an input topic that no other sensor, tach or speed source of the map uses',
      found: `'${topic}'`,
      detail: `topic '${topic}' is already the input of ${first}`,
    });
  };
  assetsNode.items.forEach((node, a) => {
    const asset = reader.resolve(node);
    if (!isMap(asset)) return;
    const assetId = String(rawValue(reader, asset, 'id')?.value ?? `assets[${a}]`);
    const base = `${prefix}/${assetId}`;
    const sensors = reader.resolve(asset.items.find((p) => isScalar(p.key) && p.key.value === 'sensors')?.value);
    if (isSeq(sensors)) {
      sensors.items.forEach((sNode, i) => {
        const sensor = reader.resolve(sNode);
        if (!isMap(sensor)) return;
        const id = String(rawValue(reader, sensor, 'id')?.value ?? i);
        const explicit = rawValue(reader, sensor, 'topic');
        const topic = typeof explicit?.value === 'string' ? explicit.value : `${base}/samples/${id}`;
        claim(topic, `sensor '${id}' of asset '${assetId}'`, `assets[${a}].sensors[${i}].topic`, explicit?.offset ?? reader.offset(sensor));
      });
    }
    const speed = reader.resolve(asset.items.find((p) => isScalar(p.key) && p.key.value === 'speed')?.value);
    if (!isMap(speed)) return;
    const source = rawValue(reader, speed, 'source')?.value;
    const explicit = rawValue(reader, speed, 'topic');
    if (source === 'tach') {
      const topic = typeof explicit?.value === 'string' ? explicit.value : `${base}/samples/tach`;
      claim(topic, `the tach of asset '${assetId}'`, `assets[${a}].speed.topic`, explicit?.offset ?? reader.offset(speed));
    } else if (source === 'topic' && typeof explicit?.value === 'string') {
      claim(explicit.value, `the speed records of asset '${assetId}'`, `assets[${a}].speed.topic`, explicit.offset);
    }
  });
}

function rawValue(reader: Reader, map: YAMLMap, key: string): { value: unknown; offset: number | undefined } | undefined {
  const pair = map.items.find((p) => isScalar(p.key) && p.key.value === key);
  const value = reader.resolve(pair?.value);
  return isScalar(value) ? { value: value.value, offset: reader.offset(value) } : undefined;
}

function readAlarm(reader: Reader, asset: MapView): AlarmConfig | undefined {
  const view = reader.map(asset.get('alarm') ?? null, asset.child('alarm'), ALARM_KEYS, asset.keyOffset('alarm'));
  if (!view) return undefined;
  const onDelayS = view.number('on_delay_s', { ge: 0 });
  const offDelayS = view.number('off_delay_s', { ge: 0 });
  const deadbandPct = view.number('deadband_pct', { ge: 0, lt: 100 });
  const priority = view.text('priority', { oneOf: PRIORITIES }) as AlarmConfig['priority'] | undefined;
  const escalateAfterS = view.has('escalate_after_s')
    ? view.number('escalate_after_s', { gt: 0 })
    : onDelayS === undefined
      ? undefined
      : DEFAULT_ESCALATE_AFTER_ON_DELAYS * onDelayS;
  const escalateGrowth = view.number('escalate_growth', { gt: 1 }, DEFAULT_ESCALATE_GROWTH);
  if (!view.has('escalate_after_s') && onDelayS === 0) {
    reader.log.warn({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child('escalate_after_s'),
      offset: view.valueOffset('on_delay_s'),
      expected: 'escalate_after_s > 0',
      found: '0 (10 x on_delay_s 0)',
      detail: 'defaults to 10 x on_delay_s = 0: an alarm would escalate as soon as it is raised; set escalate_after_s',
    });
  }
  if (
    onDelayS === undefined ||
    offDelayS === undefined ||
    deadbandPct === undefined ||
    priority === undefined ||
    escalateAfterS === undefined ||
    escalateGrowth === undefined
  ) {
    return undefined;
  }
  return { onDelayS, offDelayS, deadbandPct, priority, escalateAfterS, escalateGrowth };
}

function readAnalysis(reader: Reader, asset: MapView): AnalysisConfig | undefined {
  const view = reader.map(asset.get('analysis') ?? null, asset.child('analysis'), ANALYSIS_KEYS, asset.keyOffset('analysis'));
  if (!view) return undefined;
  const d = DEFAULT_ANALYSIS;
  const frameSize = view.number('frame_size', { integer: true, ge: MIN_FRAME_SIZE, le: MAX_FRAME_SIZE }, d.frameSize);
  if (frameSize !== undefined && !isPowerOfTwo(frameSize)) powerOfTwoProblem(reader, view, 'frame_size', frameSize);
  const overlap = view.number('overlap', { ge: 0, lt: 1 }, d.overlap);
  const averages = view.number('averages', { integer: true, ge: 1 }, d.averages);
  const decisionStepS = view.number('decision_step_s', { gt: 0 }, d.decisionStepS);
  let decimation: number | 'auto' | undefined = d.decimation;
  if (view.has('decimation')) {
    const node = view.present('decimation', "'auto' or a power-of-two integer");
    const raw = node && 'value' in node ? (node as { value: unknown }).value : undefined;
    if (raw === 'auto') decimation = 'auto';
    else if (node) {
      decimation = reader.number(node, view.child('decimation'), { integer: true, ge: 1 });
      if (decimation !== undefined && !isPowerOfTwo(decimation)) {
        powerOfTwoProblem(reader, view, 'decimation', decimation);
        decimation = undefined;
      }
    } else decimation = undefined;
  }
  if (frameSize === undefined || !isPowerOfTwo(frameSize)) return undefined;
  if (overlap === undefined || averages === undefined || decisionStepS === undefined || decimation === undefined) return undefined;
  return { frameSize, overlap, averages, decimation, decisionStepS };
}

function isPowerOfTwo(n: number): boolean {
  return Number.isInteger(n) && n >= 1 && (n & (n - 1)) === 0;
}

function powerOfTwoProblem(reader: Reader, view: MapView, key: string, found: number): void {
  reader.log.error({
    code: 'QB_E_CONFIG_RANGE',
    path: view.child(key),
    offset: view.valueOffset(key),
    expected: key === 'frame_size' ? `a power of two from ${MIN_FRAME_SIZE} to ${MAX_FRAME_SIZE}` : 'a power of two (1, 2, 4, 8, ...)',
    found: String(found),
  });
}

function readSeverity(reader: Reader, asset: MapView): SeverityConfig | undefined {
  const view = reader.map(asset.get('severity') ?? null, asset.child('severity'), SEVERITY_KEYS, asset.keyOffset('severity'));
  if (!view) return undefined;
  // Both are required once the block is written: the default basis would mislabel the site's own boundaries.
  const bounds = view.numbers('zone_boundaries_mm_s', 3, { gt: 0 });
  const basis = view.text('basis');
  if (bounds && !(bounds[0] < bounds[1] && bounds[1] < bounds[2])) {
    reader.log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: view.child('zone_boundaries_mm_s'),
      offset: view.valueOffset('zone_boundaries_mm_s'),
      expected: '[ab, bc, cd] in ascending order',
      found: `[${bounds.join(', ')}]`,
    });
    return undefined;
  }
  if (!bounds || basis === undefined) return undefined;
  return { zoneBoundariesMmS: [bounds[0], bounds[1], bounds[2]], basis };
}
