import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { Ajv2020 } from 'ajv/dist/2020.js';
import { describe, expect, it } from 'vitest';
import { parse, parseDocument } from 'yaml';
import type { CliIo } from '../src/cli/io.ts';
import { main } from '../src/cli/main.ts';
import {
  AGENT_BLOCK,
  ALARM_BLOCK,
  ANALYSIS_BLOCK,
  ASSET_BLOCK,
  BROKER_BLOCK,
  COMPONENT_BLOCK,
  MAP_BLOCK,
  ORDER_BLOCK,
  SENSOR_BLOCK,
  SEVERITY_BLOCK,
  SPEED_BLOCK,
  SPARKPLUG_BLOCK,
  TRANSIENTS_BLOCK,
  specOf,
  type BlockSpec,
  type KeySpec,
} from '../src/config/mapKeys.ts';
import { buildMapSchema } from '../src/config/mapSchema.ts';
import { tempDir } from './support/liveRig.ts';

// The asset map's JSON Schema against the validator it is built beside: the committed schema is
// the generated one; every shipped map passes it (ajv, a general-purpose JSON Schema validator,
// in draft 2020-12 strict mode); and broken maps are refused by `qband check` (always, with line
// and column) and by the schema exactly where the schema can say so. A broken map that one
// refuses and the other accepts fails the test, so neither can drift from the other.
const ROOT = new URL('..', import.meta.url).pathname;
const SCHEMA_PATH = join(ROOT, 'schema/asset-map.schema.json');
const SHIPPED_MAPS = ['config/example-map.yaml', 'config/demo-map.yaml', 'deploy/map.example.yaml'];
const SCHEMA_COMMENT = /^# yaml-language-server: \$schema=(\S+)$/m;

const ajv = new Ajv2020({ strict: true, strictRequired: false, allErrors: true });
const validate = ajv.compile(JSON.parse(readFileSync(SCHEMA_PATH, 'utf8')));

async function check(text: string): Promise<{ exit: number; out: string }> {
  const file = join(tempDir(), 'map.yaml');
  writeFileSync(file, text);
  let out = '';
  const io: CliIo = { cwd: ROOT, stdout: { write: (s: string) => void (out += s) }, stderr: { write: (s: string) => void (out += s) } };
  const exit = await main(['check', file], io);
  return { exit, out };
}

/** Every block, where it sits in BASE_MAP (which holds every block and every kind of order). */
const PLACES: Array<[BlockSpec, (string | number)[]]> = [
  [MAP_BLOCK, []],
  [BROKER_BLOCK, ['broker']],
  [AGENT_BLOCK, ['agent']],
  [ASSET_BLOCK, ['assets', 0]],
  [SPEED_BLOCK, ['assets', 0, 'speed']],
  [ORDER_BLOCK, ['assets', 0, 'orders', 0]],
  [specOf(ORDER_BLOCK, 'bearing').block!, ['assets', 0, 'orders', 2, 'bearing']],
  [SENSOR_BLOCK, ['assets', 0, 'sensors', 0]],
  [COMPONENT_BLOCK, ['assets', 0, 'components', 0]],
  [ALARM_BLOCK, ['assets', 0, 'alarm']],
  [ANALYSIS_BLOCK, ['assets', 0, 'analysis']],
  [SEVERITY_BLOCK, ['assets', 0, 'severity']],
  [TRANSIENTS_BLOCK, ['assets', 0, 'transients']],
  [SPARKPLUG_BLOCK, ['sparkplug']],
];

const BASE_MAP = `site: test-site
broker: { url: "mqtt://127.0.0.1:1883", topic_prefix: qb }
agent: { state_every_s: 1, stale_after_s: 5 }
sparkplug: { group_id: plant-a, edge_node_id: north-basin-1, min_data_interval_s: 1 }
assets:
  - id: pump-1
    description: a test pump
    procedure: site procedure 7
    speed: { source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [450, 1200] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: vane-pass, vanes: 5 }
      - { id: outer-race, bearing: { rolling_elements: 9, element_diameter: 7.9, pitch_diameter: 38.5 }, tone: bpfo }
    sensors:
      - { id: top-x, channel: 0, units: g, scale: 1 }
    components:
      - { id: reed, fn_hz: 14.2, q: 8, orders: [1x] }
      - { id: pipe, fn_hz: 83, zeta: 0.03 }
      - { id: frame, fn_hz: 40, band_hz: [38, 42] }
    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }
    analysis: { frame_size: 8192, overlap: 0.5, averages: 4, decimation: auto }
    severity: { zone_boundaries_mm_s: [1.4, 2.8, 4.5], basis: the site's own }
    transients: { hold_s: 2, keep: 10 }
`;

function edited(path: (string | number)[], value: unknown): string {
  const doc = parseDocument(BASE_MAP);
  doc.setIn(path, doc.createNode(value));
  return String(doc);
}

function removed(path: (string | number)[]): string {
  const doc = parseDocument(BASE_MAP);
  doc.deleteIn(path);
  return String(doc);
}

/** Values just outside a number key's bounds, and a wrong type. */
function outsideValues(k: KeySpec): unknown[] {
  const r = k.rule ?? {};
  const out: unknown[] = ['not a number'];
  if (r.gt !== undefined) out.push(r.gt);
  if (r.ge !== undefined) out.push(r.integer ? r.ge - 1 : r.ge - 0.001);
  if (r.lt !== undefined) out.push(r.lt);
  if (r.le !== undefined) out.push(r.integer ? r.le + 1 : r.le * 1.001 + 0.001);
  if (r.integer) out.push((r.ge ?? r.gt ?? 0) + 1.5);
  return out;
}

interface Broken {
  name: string;
  text: string;
  /** Whether a JSON Schema can express the rule the map breaks. */
  schemaCan: boolean;
}

function generatedCorpus(): Broken[] {
  const out: Broken[] = [];
  for (const [block, place] of PLACES) {
    out.push({ name: `${block.title}: an unknown key`, text: edited([...place, 'no_such_key'], 1), schemaCan: true });
    for (const k of block.keys) {
      const at = [...place, k.key];
      if (k.kind === 'number') for (const v of outsideValues(k)) out.push({ name: `${at.join('.')} = ${JSON.stringify(v)}`, text: edited(at, v), schemaCan: true });
      if (k.kind === 'numbers') {
        const r = k.rule ?? {};
        const bad = r.gt ?? (r.ge !== undefined ? r.ge - 1 : -1);
        out.push({ name: `${at.join('.')} with an item out of range`, text: edited(at, Array.from({ length: k.count! }, (_, i) => (i === 0 ? bad : 10 * (i + 1)))), schemaCan: true });
        out.push({ name: `${at.join('.')} with one item too many`, text: edited(at, Array.from({ length: k.count! + 1 }, (_, i) => i + 1)), schemaCan: true });
      }
      if (k.kind === 'word') out.push({ name: `${at.join('.')} = a word not allowed`, text: edited(at, 'no-such-word'), schemaCan: true });
      if (k.kind === 'powerOfTwo' || k.kind === 'autoOrPowerOfTwo') out.push({ name: `${at.join('.')} = 1000`, text: edited(at, 1000), schemaCan: true });
      if (k.kind === 'id') out.push({ name: `${at.join('.')} = an id with a space`, text: edited(at, 'has space'), schemaCan: true });
      if (k.kind === 'block' || k.kind === 'list') out.push({ name: `${at.join('.')} = a number`, text: edited(at, 5), schemaCan: true });
      if (k.required) out.push({ name: `${at.join('.')} missing`, text: removed(at), schemaCan: true });
    }
  }
  return out;
}

const HAND_CORPUS: Broken[] = [
  { name: 'q and zeta both given', text: edited(['assets', 0, 'components', 0, 'zeta'], 0.05), schemaCan: true },
  { name: 'no damping at all', text: removed(['assets', 0, 'components', 0, 'q']), schemaCan: true },
  { name: 'two order definitions', text: edited(['assets', 0, 'orders', 0, 'vanes'], 5), schemaCan: true },
  { name: 'a bearing without its tone', text: removed(['assets', 0, 'orders', 2, 'tone']), schemaCan: true },
  { name: 'scale and sensitivity both', text: edited(['assets', 0, 'sensors', 0, 'sensitivity_mv_per_unit'], 100), schemaCan: true },
  { name: 'an empty asset list', text: edited(['assets'], []), schemaCan: true },
  { name: 'a key with no value', text: BASE_MAP.replace('procedure: site procedure 7', 'procedure:'), schemaCan: true },
  { name: 'range_rpm max below min', text: edited(['assets', 0, 'speed', 'range_rpm'], [900, 100]), schemaCan: false },
  { name: 'a component naming an unknown order', text: edited(['assets', 0, 'components', 0, 'orders'], ['2x']), schemaCan: false },
  { name: 'two sensors with one id', text: edited(['assets', 0, 'sensors', 1], { id: 'top-x', channel: 2, units: 'g' }), schemaCan: false },
  { name: 'zone boundaries not ascending', text: edited(['assets', 0, 'severity', 'zone_boundaries_mm_s'], [4.5, 2.8, 1.4]), schemaCan: false },
  { name: 'a measured band that misses fn', text: edited(['assets', 0, 'components', 2, 'band_hz'], [50, 60]), schemaCan: false },
  { name: 'a sensor key with source tach', text: edited(['assets', 0, 'speed', 'sensor'], 'top-x'), schemaCan: false },
  { name: 'a sensor on the tach channel', text: edited(['assets', 0, 'sensors', 0, 'channel'], 1), schemaCan: false },
  { name: 'pitch diameter below element diameter', text: edited(['assets', 0, 'orders', 2, 'bearing', 'pitch_diameter'], 5), schemaCan: false },
];

describe('the asset map schema', () => {
  it('is the one built from the readers\' key table (run `npm run schema` after changing a key)', () => {
    expect(JSON.parse(readFileSync(SCHEMA_PATH, 'utf8'))).toEqual(buildMapSchema());
  });

  it('gives every key a description for hover text, with its unit where it has one', () => {
    const missing: string[] = [];
    const walk = (s: Record<string, unknown>, path: string) => {
      const props = s.properties as Record<string, Record<string, unknown>> | undefined;
      for (const [k, v] of Object.entries(props ?? {})) {
        if (typeof v.description !== 'string' || v.description.length < 10) missing.push(`${path}${k}`);
        walk(v, `${path}${k}.`);
        if (v.items) walk(v.items as Record<string, unknown>, `${path}${k}[].`);
      }
    };
    const schema = buildMapSchema();
    walk(schema, '');
    expect(missing).toEqual([]);
    const fn = (((schema.properties as any).assets.items.properties.components.items.properties.fn_hz) as { description: string }).description;
    expect(fn).toBe('Natural frequency. Unit: Hz.');
  });

  it.each(SHIPPED_MAPS)('%s validates and carries the YAML language server schema comment', (file) => {
    const text = readFileSync(join(ROOT, file), 'utf8');
    const ok = validate(parse(text));
    expect(validate.errors ?? [], file).toEqual([]);
    expect(ok).toBe(true);
    const ref = SCHEMA_COMMENT.exec(text)?.[1];
    expect(ref, `${file}: # yaml-language-server: $schema=...`).toBeDefined();
    expect(join(ROOT, file, '..', ref!)).toBe(SCHEMA_PATH);
  });

  it('the base map of the broken-map corpus is valid to both', async () => {
    expect(validate(parse(BASE_MAP)), JSON.stringify(validate.errors)).toBe(true);
    const r = await check(BASE_MAP);
    expect(r.exit, r.out).toBe(0);
  });

  const corpus = [...generatedCorpus(), ...HAND_CORPUS];
  it(`a corpus of ${corpus.length} broken maps: qband check refuses each with line and column, the schema exactly those it can express`, async () => {
    expect(corpus.length).toBeGreaterThan(150);
    const disagreements: string[] = [];
    for (const b of corpus) {
      const r = await check(b.text);
      if (r.exit !== 1 || !/line \d+, col \d+/.test(r.out)) disagreements.push(`${b.name}: qband check exit ${r.exit} without a located problem:\n${r.out}`);
      const schemaRefuses = !validate(parse(b.text));
      if (schemaRefuses !== b.schemaCan) disagreements.push(`${b.name}: the schema ${schemaRefuses ? 'refuses' : 'accepts'} it`);
    }
    expect(disagreements).toEqual([]);
  });
});
