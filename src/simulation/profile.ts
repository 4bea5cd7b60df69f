/**
 * The speed profile of a simulated run: a sample rate, a piecewise-linear speed (holds and
 * ramps from a start speed), the forcing each order applies, noise and a seed.
 *
 *   asset: cw-pump-2            # optional: which asset of the map the run is for
 *   sample_rate_hz: 2560
 *   start_rpm: 450
 *   segments:
 *     - { hold_s: 10 }
 *     - { ramp_to_rpm: 852, over_s: 20 }
 *   forcing:                    # order id -> g at the top speed of the run, or a mapping
 *     1x: 0.02
 *     vane-pass: { amplitude_g: 0.01, scaling: constant }
 *   noise_g: 0.002              # RMS of the white noise added to every sensor
 *   seed: 7
 *
 * Validation reads the whole file and reports every problem with its path, line and column, in
 * the same way as the asset map (it shares src/config's located reader), under QB_E_PROFILE_*.
 */
import { isMap, LineCounter, parseDocument, type Node, type Pair } from 'yaml';
import type { AssetConfig } from '../config/types.ts';
import { ProblemLog, type ConfigProblem } from '../config/configProblem.ts';
import { Reader } from '../config/mapView.ts';
import type { ErrorCode } from '../errors.ts';
import { MAX_SAMPLE_RATE_HZ } from '../acquisition/recordingLimits.ts';
import { firstTooDeep, MAX_YAML_DEPTH } from '../config/yamlDepth.ts';

export type ProfileSegment = { kind: 'hold'; durationS: number } | { kind: 'ramp'; toRpm: number; durationS: number };

/** 'speed-squared': amplitude grows with speed^2 like unbalance force; 'constant': it does not. */
export type ForcingScaling = 'speed-squared' | 'constant';
export const FORCING_SCALINGS: readonly ForcingScaling[] = ['speed-squared', 'constant'];

export interface OrderForcing {
  orderId: string;
  /** Acceleration amplitude (g, peak) the order gives with no resonance, at the run's top speed. */
  amplitudeG: number;
  scaling: ForcingScaling;
}

export interface Profile {
  assetId?: string;
  sampleRateHz: number;
  startRpm: number;
  segments: ProfileSegment[];
  forcing: OrderForcing[];
  /** RMS of the white noise added to each sensor (g). */
  noiseG: number;
  seed: number;
}

export interface ProfileParseResult {
  profile: Profile | null;
  problems: ConfigProblem[];
  /** Line and column of located keys (`asset`, `sample_rate_hz`, `forcing.<id>`) for later checks. */
  positions: Map<string, { line: number; col: number }>;
}

/** Longest run the simulator accepts (s): a day of data, to catch a unit slip (ms for s). */
export const MAX_PROFILE_DURATION_S = 86_400;

const TOP_KEYS = ['asset', 'sample_rate_hz', 'start_rpm', 'segments', 'forcing', 'noise_g', 'seed'] as const;

/** The located reader speaks in config codes; a profile's problems carry profile codes. */
function profileCode(code: ErrorCode): ErrorCode {
  return code === 'QB_E_CONFIG_SYNTAX' ? 'QB_E_PROFILE_SYNTAX' : code.startsWith('QB_E_CONFIG_') ? 'QB_E_PROFILE_INVALID' : code;
}

export function parseProfile(text: string): ProfileParseResult {
  const lineCounter = new LineCounter();
  const log = new ProblemLog(lineCounter);
  const positions = new Map<string, { line: number; col: number }>();
  const finish = (profile: Profile | null): ProfileParseResult => {
    const problems = log.sorted().problems.map((p) => ({ ...p, code: profileCode(p.code) }));
    return { profile: problems.length === 0 ? profile : null, problems, positions };
  };
  const deep = firstTooDeep(text);
  if (deep !== null) {
    for (let i = 0; i >= 0 && i <= deep; i = text.indexOf('\n', i) + 1 || -1) lineCounter.addNewLine(i);
    log.error({ code: 'QB_E_CONFIG_SYNTAX', path: '', offset: deep, expected: `at most ${MAX_YAML_DEPTH} levels of nesting`, found: 'deeper nesting', detail: `the document is nested too deeply here (more than ${MAX_YAML_DEPTH} levels)` });
    return finish(null);
  }
  const doc = parseDocument(text, { lineCounter, prettyErrors: false, uniqueKeys: true });
  for (const e of doc.errors) {
    log.error({ code: 'QB_E_CONFIG_SYNTAX', path: '', offset: e.pos[0], expected: 'well-formed YAML', found: e.code, detail: e.message.split('\n')[0] });
  }
  if (doc.errors.length > 0) return finish(null);

  const reader = new Reader(doc, text, log);
  const top = reader.map(reader.resolve(doc.contents), '', TOP_KEYS, 0);
  if (!top) return finish(null);
  const locate = (path: string, offset: number | undefined) => positions.set(path, log.position(offset));

  const assetId = top.has('asset') ? top.text('asset', { id: true }) : undefined;
  locate('asset', top.valueOffset('asset') ?? top.offset);
  const sampleRateHz = top.number('sample_rate_hz', { ge: 1, le: MAX_SAMPLE_RATE_HZ, integer: true });
  locate('sample_rate_hz', top.valueOffset('sample_rate_hz') ?? top.offset);
  const startRpm = top.number('start_rpm', { ge: 0, le: 1_000_000 });
  const noiseG = top.number('noise_g', { ge: 0 }, 0);
  const seed = top.number('seed', { ge: 0, le: 4_294_967_295, integer: true }, 1);

  const segments: ProfileSegment[] = [];
  let segmentsOk = true;
  const segNodes = top.has('segments')
    ? reader.list(top.present('segments', 'a list of segments') ?? null, 'segments', 'a list of segments ({ hold_s } or { ramp_to_rpm, over_s })', top.keyOffset('segments'))
    : top.missing('segments', 'a list of segments ({ hold_s } or { ramp_to_rpm, over_s })');
  if (segNodes && segNodes.length === 0) {
    log.error({ code: 'QB_E_CONFIG_RANGE', path: 'segments', offset: top.valueOffset('segments'), expected: 'at least one segment', found: 'an empty list' });
  }
  segNodes?.forEach((node, i) => {
    const path = `segments[${i}]`;
    const seg = reader.map(node, path, ['hold_s', 'ramp_to_rpm', 'over_s'], top.valueOffset('segments'));
    if (!seg) return void (segmentsOk = false);
    if (seg.has('hold_s')) {
      if (seg.has('ramp_to_rpm')) seg.notApplicable('ramp_to_rpm', 'a segment is either a hold (hold_s) or a ramp (ramp_to_rpm with over_s)');
      if (seg.has('over_s')) seg.notApplicable('over_s', 'over_s belongs to a ramp; a hold gives its length in hold_s');
      const durationS = seg.number('hold_s', { gt: 0 });
      if (durationS === undefined) return void (segmentsOk = false);
      segments.push({ kind: 'hold', durationS });
    } else if (seg.has('ramp_to_rpm') || seg.has('over_s')) {
      const toRpm = seg.number('ramp_to_rpm', { ge: 0, le: 1_000_000 });
      const durationS = seg.number('over_s', { gt: 0 });
      if (toRpm === undefined || durationS === undefined) return void (segmentsOk = false);
      segments.push({ kind: 'ramp', toRpm, durationS });
    } else {
      seg.missing('hold_s', 'hold_s, or ramp_to_rpm with over_s');
      segmentsOk = false;
    }
  });
  const totalS = segments.reduce((s, g) => s + g.durationS, 0);
  if (segmentsOk && totalS > MAX_PROFILE_DURATION_S) {
    log.error({
      code: 'QB_E_CONFIG_RANGE',
      path: 'segments',
      offset: top.valueOffset('segments'),
      expected: `a total length <= ${MAX_PROFILE_DURATION_S} s`,
      found: `${totalS} s`,
    });
  }

  const forcing: OrderForcing[] = [];
  const forcingNode = top.has('forcing') ? top.present('forcing', 'a mapping of order id to amplitude in g') : top.missing('forcing', 'a mapping of order id to amplitude in g');
  if (forcingNode && !isMap(forcingNode)) {
    log.error({ code: 'QB_E_CONFIG_TYPE', path: 'forcing', offset: reader.offset(forcingNode), expected: 'a mapping of order id to amplitude in g', found: reader.describe(forcingNode) });
  }
  if (isMap(forcingNode)) {
    // Keys are the asset's order ids, so they are checked against the asset, not a fixed list.
    for (const pair of forcingNode.items as Pair[]) {
      const keyNode = pair.key as Node;
      const orderId = reader.text(keyNode, 'forcing', { id: true });
      if (orderId === undefined) continue;
      const path = `forcing.${orderId}`;
      const valueNode = reader.resolve(pair.value);
      locate(path, reader.offset(keyNode));
      if (isMap(valueNode)) {
        const entry = reader.map(valueNode, path, ['amplitude_g', 'scaling'], reader.offset(keyNode));
        const amplitudeG = entry?.number('amplitude_g', { ge: 0 });
        const scaling = entry?.text('scaling', { oneOf: FORCING_SCALINGS, fallback: 'speed-squared' }) as ForcingScaling | undefined;
        if (amplitudeG !== undefined && scaling !== undefined) forcing.push({ orderId, amplitudeG, scaling });
      } else {
        const amplitudeG = reader.number(valueNode, path, { ge: 0 });
        if (amplitudeG !== undefined) forcing.push({ orderId, amplitudeG, scaling: 'speed-squared' });
      }
    }
  }

  if (sampleRateHz === undefined || startRpm === undefined || noiseG === undefined || seed === undefined || !segmentsOk) return finish(null);
  return finish({ ...(assetId !== undefined ? { assetId } : {}), sampleRateHz, startRpm, segments, forcing, noiseG, seed });
}

/** Fraction of the sample rate below which every synthesised tone must stay (Nyquist is 0.5). */
export const MAX_TONE_FRACTION_OF_FS = 0.45;

/**
 * Problems with running `profile` on `asset`: another asset named, forcing for orders the asset
 * lacks, and tones or resonances too close to half the sample rate to be represented.
 */
export function checkProfileAgainstAsset(
  profile: Profile,
  asset: AssetConfig,
  positions: Map<string, { line: number; col: number }> = new Map(),
): ConfigProblem[] {
  const problems: ConfigProblem[] = [];
  const add = (path: string, expected: string, found: string, detail: string) => {
    const { line, col } = positions.get(path) ?? { line: 1, col: 1 };
    problems.push({ code: 'QB_E_PROFILE_ASSET', path, line, col, expected, found, message: `${path}: ${detail} (line ${line}, col ${col})` });
  };
  if (profile.assetId !== undefined && profile.assetId !== asset.id) {
    add('asset', `'${asset.id}'`, `'${profile.assetId}'`, `profile is for asset '${profile.assetId}', but it is being run on '${asset.id}'`);
  }
  const limitHz = MAX_TONE_FRACTION_OF_FS * profile.sampleRateHz;
  const topRpm = Math.max(profile.startRpm, ...profile.segments.map((s) => (s.kind === 'ramp' ? s.toRpm : 0)));
  for (const f of profile.forcing) {
    const order = asset.orders.find((o) => o.id === f.orderId);
    if (!order) {
      const known = asset.orders.map((o) => o.id).join(', ');
      add(`forcing.${f.orderId}`, `one of ${known}`, `'${f.orderId}'`, `asset '${asset.id}' has no order '${f.orderId}' (its orders: ${known})`);
      continue;
    }
    const topHz = (order.multiple * topRpm) / 60;
    if (f.amplitudeG > 0 && topHz >= limitHz) {
      add(
        `forcing.${f.orderId}`,
        `a tone below ${limitHz} Hz (${MAX_TONE_FRACTION_OF_FS} x sample_rate_hz)`,
        `${topHz.toFixed(2)} Hz at ${topRpm} rpm`,
        `order '${order.id}' reaches ${topHz.toFixed(2)} Hz at ${topRpm} rpm, too close to half the sample rate; raise sample_rate_hz above ${Math.ceil(topHz / MAX_TONE_FRACTION_OF_FS)}`,
      );
    }
  }
  for (const c of asset.components) {
    if (c.bandHz[1] >= limitHz) {
      add('sample_rate_hz', `a rate above ${Math.ceil(c.bandHz[1] / MAX_TONE_FRACTION_OF_FS)} Hz`, `${profile.sampleRateHz}`, `component '${c.id}' (fn ${c.fnHz} Hz) is too close to half the sample rate ${profile.sampleRateHz} Hz; raise sample_rate_hz above ${Math.ceil(c.bandHz[1] / MAX_TONE_FRACTION_OF_FS)}`);
    }
  }
  if (asset.speed.source === 'tach') {
    const pulseHz = (asset.speed.pulsesPerRev * topRpm) / 60;
    // A pulse needs at least one sample high and one low, plus room to tell one from the next.
    if (pulseHz > profile.sampleRateHz / 4) {
      add('sample_rate_hz', `a rate above ${Math.ceil(pulseHz * 4)} Hz`, `${profile.sampleRateHz}`, `tach pulses come at ${pulseHz.toFixed(1)} Hz at ${topRpm} rpm, more than a quarter of the sample rate; raise sample_rate_hz above ${Math.ceil(pulseHz * 4)}`);
    }
  }
  return problems;
}
