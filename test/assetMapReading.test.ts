import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { DEFAULT_AGENT, parseAssetMap } from '../src/config/parseAssetMap.ts';
import { velocityHalfPowerBand } from '../src/physics/halfPowerBand.ts';
import { describeProblems, PINNED, problemsOf, variant } from './support/pinnedMap.ts';

// Reading the asset map: the pinned example, every problem of a file reported at once with its
// line and column, unknown keys, YAML syntax. The rules on values: test/assetMapRules.test.ts.

describe('asset map: the pinned example', () => {
  it('validates unchanged, and config/example-map.yaml is that example', () => {
    const file = readFileSync(new URL('../config/example-map.yaml', import.meta.url), 'utf8');
    // The file opens with the YAML language server's schema comment (test/mapSchema.test.ts), then the example.
    expect(file).toBe(`# yaml-language-server: $schema=../schema/asset-map.schema.json\n${PINNED}`);
    const r = parseAssetMap(PINNED, 'example');
    expect(r.problems, describeProblems(r.problems)).toEqual([]);
    expect(r.warnings).toEqual([]);
    expect(r.map).not.toBeNull();
  });

  it('normalises: Q from zeta, bands, defaults, all orders and sensors when omitted', () => {
    const asset = parseAssetMap(PINNED, 'example').map!.assets[0];
    expect(asset.speed).toEqual({ source: 'tach', channel: 1, pulsesPerRev: 1, rangeRpm: [450, 1200], minConfidence: 0.6, maxAgeS: 2 });
    const [reed, pipe] = asset.components;
    expect(reed.orderIds).toEqual(['1x']);
    expect(pipe.orderIds).toEqual(['1x', '2x', 'vane-pass']);
    expect(pipe.sensorIds).toEqual(['motor-top-x']);
    // Q = 1/(2 zeta) = 1/0.06 (by hand).
    expect(pipe.q).toBeCloseTo(16.6667, 4);
    expect(pipe.dampingGiven).toBe('zeta');
    expect(reed.zeta).toBe(0.0625);
    expect(reed.bandHz).toEqual(velocityHalfPowerBand(14.2, 8));
    expect(asset.orders.map((o) => [o.id, o.multiple, o.kind, o.derivation])).toEqual([
      ['1x', 1, 'multiple', 'multiple 1 x 1.000'],
      ['2x', 2, 'multiple', 'multiple 2 x 1.000'],
      ['vane-pass', 5, 'multiple', 'multiple 5 x 1.000'],
    ]);
    expect(asset.sensors).toEqual([{ id: 'motor-top-x', channel: 0, units: 'g', scale: 1 }]);
    // escalate_after_s defaults to 10 x on_delay_s = 300 s; growth 2.
    expect(asset.alarm).toEqual({ onDelayS: 30, offDelayS: 10, deadbandPct: 1, priority: 'high', escalateAfterS: 300, escalateGrowth: 2 });
    expect(asset.analysis).toEqual({ frameSize: 8192, overlap: 0.5, averages: 4, decimation: 'auto', decisionStepS: 0.1 });
    expect(asset.severity.zoneBoundariesMmS).toEqual([1.4, 2.8, 4.5]);
    expect(asset.severity.basis).toMatch(/from memory/);
  });
});

// Every line of this map has at least one mistake; each expectation names the line by a snippet
// and the column by the text the problem must point at (the column is found in the fixture, not
// copied from the validator's output).
const MANY = `site: north-basin
assets:
  - id: cw-pump-2
    description: test
    speed:
      source: tach
      channel: 0
      range_rpm: [1200, 450]
      sensor: motor-top-x
    orders:
      - { id: 1x, multiple: 1 }
      - { id: 1x, multiple: 2 }
      - { id: vp, vanes: 5, multiple: 5 }
      - { id: bp, bearing: { rolling_elements: 9, element_diameter: 0.3126, pitch_diameter: 0.2 }, tone: bpfx }
      - { id: nothing }
    sensors:
      - { id: motor-top-x, channel: 0, units: g, scale: 1, sensitivity_mv_per_unit: 100 }
      - { id: s2, channel: 2, units: mm/s }
    components:
      - { id: motor-reed, fnhz: 14.2, q: 0, orders: [1x, 3x] }
      - { id: pipe, fn_hz: -3, zeta: 1.5, q: 4 }
      - { id: frame, fn_hz: 40, band_hz: [41, 45], sensors: [nope] }
      - { id: deck, fn_hz: .nan, q: "8" }
    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: critical }
    analysis: { frame_size: 1000, decimation: 3, overlap: 1 }
`;

/** [code, path, a snippet unique to the line, the text within that line the problem points at] */
const EXPECTED: [string, string, string, string][] = [
  ['QB_E_CONFIG_RANGE', 'assets[0].speed.range_rpm', 'range_rpm: [1200', '[1200'],
  ['QB_E_CONFIG_UNKNOWN_KEY', 'assets[0].speed.sensor', 'sensor: motor-top-x', 'sensor'],
  ['QB_E_CONFIG_DUPLICATE', 'assets[0].orders[1].id', 'multiple: 2', '1x'],
  ['QB_E_CONFIG_CONFLICT', 'assets[0].orders[2].vanes', 'id: vp', 'vanes'],
  ['QB_E_CONFIG_RANGE', 'assets[0].orders[3].bearing.pitch_diameter', 'id: bp', '0.2 }'],
  ['QB_E_CONFIG_RANGE', 'assets[0].orders[3].tone', 'id: bp', 'bpfx'],
  ['QB_E_CONFIG_MISSING', 'assets[0].orders[4].multiple', 'id: nothing', '{'],
  ['QB_E_CONFIG_DUPLICATE', 'assets[0].sensors[0].channel', 'id: motor-top-x', '0,'],
  ['QB_E_CONFIG_CONFLICT', 'assets[0].sensors[0].sensitivity_mv_per_unit', 'id: motor-top-x', 'sensitivity_mv_per_unit'],
  ['QB_E_CONFIG_RANGE', 'assets[0].sensors[1].units', 'id: s2', 'mm/s'],
  ['QB_E_CONFIG_MISSING', 'assets[0].components[0].fn_hz', 'id: motor-reed', '{'],
  ['QB_E_CONFIG_UNKNOWN_KEY', 'assets[0].components[0].fnhz', 'id: motor-reed', 'fnhz'],
  ['QB_E_CONFIG_RANGE', 'assets[0].components[0].q', 'id: motor-reed', '0,'],
  ['QB_E_CONFIG_REFERENCE', 'assets[0].components[0].orders[1]', 'id: motor-reed', '3x'],
  ['QB_E_CONFIG_RANGE', 'assets[0].components[1].fn_hz', 'id: pipe', '-3'],
  ['QB_E_CONFIG_CONFLICT', 'assets[0].components[1].zeta', 'id: pipe', 'zeta'],
  ['QB_E_CONFIG_RANGE', 'assets[0].components[1].zeta', 'id: pipe', '1.5'],
  ['QB_E_CONFIG_RANGE', 'assets[0].components[2].band_hz', 'id: frame', '[41'],
  ['QB_E_CONFIG_REFERENCE', 'assets[0].components[2].sensors[0]', 'id: frame', 'nope'],
  ['QB_E_CONFIG_TYPE', 'assets[0].components[3].fn_hz', 'id: deck', '.nan'],
  ['QB_E_CONFIG_TYPE', 'assets[0].components[3].q', 'id: deck', '"8"'],
  ['QB_E_CONFIG_RANGE', 'assets[0].alarm.priority', 'priority: critical', 'critical'],
  ['QB_E_CONFIG_RANGE', 'assets[0].analysis.frame_size', 'frame_size', '1000'],
  ['QB_E_CONFIG_RANGE', 'assets[0].analysis.decimation', 'frame_size', '3,'],
  ['QB_E_CONFIG_RANGE', 'assets[0].analysis.overlap', 'frame_size', '1 }'],
];

function locate(text: string, lineSnippet: string, target: string): { line: number; col: number } {
  const lines = text.split('\n');
  const index = lines.findIndex((l) => l.includes(lineSnippet));
  expect(index, `snippet '${lineSnippet}' in fixture`).toBeGreaterThanOrEqual(0);
  const col = lines[index].indexOf(target);
  expect(col, `'${target}' on line ${index + 1}`).toBeGreaterThanOrEqual(0);
  return { line: index + 1, col: col + 1 };
}

describe('asset map: a file with many mistakes', () => {
  const result = parseAssetMap(MANY, 'many.yaml');

  it('reports every mistake at once, no map', () => {
    expect(result.map).toBeNull();
    const got = result.problems.map((p) => `${p.code} ${p.path}`);
    const want = EXPECTED.map(([code, path]) => `${code} ${path}`);
    expect([...got].sort(), describeProblems(result.problems)).toEqual([...want].sort());
  });

  for (const [code, path, lineSnippet, target] of EXPECTED) {
    it(`${path}: ${code} at the right line and column`, () => {
      const where = locate(MANY, lineSnippet, target);
      const p = result.problems.find((x) => x.code === code && x.path === path);
      expect(p, describeProblems(result.problems)).toBeDefined();
      expect({ line: p!.line, col: p!.col }, p!.message).toEqual(where);
      expect(p!.message).toContain(`${path}: `);
      expect(p!.message).toContain(`(line ${where.line}, col ${where.col})`);
    });
  }

  it('message quotes what was expected and what was found', () => {
    const q = result.problems.find((p) => p.path === 'assets[0].components[0].q')!;
    expect(q.expected).toBe('a number >= 0.5');
    expect(q.found).toBe('0');
    expect(q.message).toBe(`assets[0].components[0].q: must be a number >= 0.5, got 0 (line ${q.line}, col ${q.col})`);
  });

  it('keeps warnings apart: the missing procedure is a warning, not a problem', () => {
    expect(result.warnings.map((w) => w.path)).toEqual(['assets[0].procedure']);
    expect(result.problems.some((p) => p.path === 'assets[0].procedure')).toBe(false);
  });

  it('lists problems in file order', () => {
    const places = result.problems.map((p) => p.line * 1000 + p.col);
    expect(places).toEqual([...places].sort((a, b) => a - b));
  });
});

describe('asset map: unknown keys', () => {
  it('near miss: suggests the key (fnHz -> fn_hz, on_delay -> on_delay_s, pulse_per_rev -> pulses_per_rev)', () => {
    const ps = problemsOf(
      variant([
        ['fn_hz: 14.2', 'fnHz: 14.2'],
        ['on_delay_s: 30', 'on_delay: 30'],
        ['pulses_per_rev: 1', 'pulse_per_rev: 1'],
      ]),
    );
    const unknown = ps.filter((p) => p.code === 'QB_E_CONFIG_UNKNOWN_KEY').map((p) => p.message);
    expect(unknown).toHaveLength(3);
    expect(unknown[0]).toMatch(/pulse_per_rev: unknown key, did you mean 'pulses_per_rev'\?/);
    expect(unknown[1]).toMatch(/fnHz: unknown key, did you mean 'fn_hz'\?/);
    expect(unknown[2]).toMatch(/on_delay: unknown key, did you mean 'on_delay_s'\?/);
  });

  it('far from every key: lists the keys instead', () => {
    const ps = problemsOf(variant([], '    colour: blue\n'));
    expect(ps).toHaveLength(1);
    expect(ps[0].code).toBe('QB_E_CONFIG_UNKNOWN_KEY');
    expect(ps[0].message).toMatch(/^assets\[0\]\.colour: unknown key; expected one of id, description/);
    expect(ps[0].line).toBe(21);
    expect(ps[0].col).toBe(5);
  });

  it('a key of another speed source does not apply (sensor with source tach)', () => {
    const ps = problemsOf(variant([['pulses_per_rev: 1', 'pulses_per_rev: 1\n      sensor: motor-top-x']]));
    expect(ps.map((p) => p.code)).toEqual(['QB_E_CONFIG_UNKNOWN_KEY']);
    expect(ps[0].path).toBe('assets[0].speed.sensor');
  });

  it('a tach may name the topic its pulse blocks arrive on (live agent)', () => {
    const { map, problems } = parseAssetMap(variant([['pulses_per_rev: 1', 'pulses_per_rev: 1\n      topic: site/pump/tach']]), 'x.yaml');
    expect(problems).toEqual([]);
    expect(map!.assets[0].speed.topic).toBe('site/pump/tach');
  });

  it('fills the live agent settings with defaults and checks an agent block', () => {
    expect(parseAssetMap(variant([]), 'x.yaml').map!.agent).toEqual(DEFAULT_AGENT);
    const ps = problemsOf(variant([['site: north-basin', 'site: north-basin\nagent: { state_every_s: 0, reorder_window: 2, colour: red }']]));
    // Reported in the order they stand in the file.
    expect(ps.map((p) => [p.code, p.path])).toEqual([
      ['QB_E_CONFIG_RANGE', 'agent.state_every_s'],
      ['QB_E_CONFIG_UNKNOWN_KEY', 'agent.colour'],
    ]);
  });
});

describe('asset map: YAML syntax', () => {
  it('unclosed flow sequence: syntax error with its line and column', () => {
    const ps = problemsOf(variant([['range_rpm: [450, 1200]', 'range_rpm: [450, 1200']]));
    expect(ps.length).toBeGreaterThan(0);
    expect(ps.every((p) => p.code === 'QB_E_CONFIG_SYNTAX')).toBe(true);
    expect(ps[0].message).toMatch(/YAML syntax: .*\(line \d+, col \d+\)$/);
    // The unclosed bracket is on line 10; the parser notices it there or just after.
    expect(ps[0].line).toBeGreaterThanOrEqual(10);
    expect(ps[0].line).toBeLessThanOrEqual(11);
  });

  it('a key twice in one mapping: QB_E_CONFIG_DUPLICATE at the second one', () => {
    const ps = problemsOf(variant([['channel: 1 ', 'channel: 1\n      channel: 3 ']]));
    expect(ps.map((p) => p.code)).toEqual(['QB_E_CONFIG_DUPLICATE']);
    expect(ps[0].line).toBe(9);
  });

  it('empty document: one problem saying a mapping is needed', () => {
    const ps = problemsOf('');
    expect(ps).toHaveLength(1);
    expect(ps[0].code).toBe('QB_E_CONFIG_TYPE');
    expect(ps[0].message).toMatch(/must be a mapping with 'site' and 'assets', got nothing/);
  });

  it('a list at the top: type problem', () => {
    expect(problemsOf('- a\n- b\n').map((p) => p.code)).toEqual(['QB_E_CONFIG_TYPE']);
  });
});
