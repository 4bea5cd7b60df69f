import { describe, expect, it } from 'vitest';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { bearingOrders } from '../src/physics/bearingOrders.ts';
import { describeProblems, problemsOf, variant } from './support/pinnedMap.ts';

// The asset map's rules on values and across items: bounds, damping, order kinds, sensors, speed
// sources, blocks with their defaults, input topics bound twice.

describe('asset map: rules', () => {
  it('q exactly 0.5 is accepted (on the bound), 0.49 is not', () => {
    expect(problemsOf(variant([['q: 8', 'q: 0.5']]))).toEqual([]);
    const ps = problemsOf(variant([['q: 8', 'q: 0.49']]));
    expect(ps.map((p) => [p.code, p.path])).toEqual([['QB_E_CONFIG_RANGE', 'assets[0].components[0].q']]);
  });

  it('zeta must lie in (0, 1): 0 and 1 are rejected', () => {
    for (const z of ['0', '1']) {
      const ps = problemsOf(variant([['zeta: 0.03', `zeta: ${z}`]]));
      expect(ps.map((p) => p.path), `zeta ${z}`).toEqual(['assets[0].components[1].zeta']);
    }
  });

  it('no damping at all: missing, naming the three choices', () => {
    const ps = problemsOf(variant([[', zeta: 0.03', '']]));
    expect(ps.map((p) => p.code)).toEqual(['QB_E_CONFIG_MISSING']);
    expect(ps[0].message).toMatch(/exactly one of q, zeta, band_hz/);
  });

  it('measured band_hz: Q = fn/(hi - lo), band kept as measured', () => {
    const r = parseAssetMap(variant([['zeta: 0.03', 'band_hz: [80.5, 85.5]']]), 't');
    expect(r.problems).toEqual([]);
    const pipe = r.map!.assets[0].components[1];
    // By hand: 83 / 5 = 16.6.
    expect(pipe.q).toBeCloseTo(16.6, 12);
    expect(pipe.bandHz).toEqual([80.5, 85.5]);
    expect(pipe.dampingGiven).toBe('band_hz');
  });

  it('band_hz exactly touching fn does not bracket it', () => {
    const ps = problemsOf(variant([['zeta: 0.03', 'band_hz: [83, 85]']]));
    expect(ps.map((p) => p.code)).toEqual(['QB_E_CONFIG_RANGE']);
  });

  it('band_hz far off-centre from fn: a warning, still valid', () => {
    const r = parseAssetMap(variant([['zeta: 0.03', 'band_hz: [82, 90]']]), 't');
    expect(r.problems).toEqual([]);
    expect(r.warnings.map((w) => w.path)).toEqual(['assets[0].components[1].band_hz']);
  });

  it('order kinds: vanes, blades, teeth with shaft_ratio, bearing tone', () => {
    const r = parseAssetMap(
      variant([
        [
          '      - { id: vane-pass, multiple: 5 }',
          [
            '      - { id: vane-pass, vanes: 5 }',
            '      - { id: fan-blades, blades: 7 }',
            '      - { id: mesh, teeth: 23, shaft_ratio: 0.5 }',
            '      - id: bpfi',
            '        tone: bpfi',
            '        bearing: { rolling_elements: 9, element_diameter: 0.3126, pitch_diameter: 1.537 }',
          ].join('\n'),
        ],
      ]),
      't',
    );
    expect(r.problems, describeProblems(r.problems)).toEqual([]);
    const orders = r.map!.assets[0].orders;
    expect(orders.map((o) => [o.id, o.kind, o.derivation])).toEqual([
      ['1x', 'multiple', 'multiple 1 x 1.000'],
      ['2x', 'multiple', 'multiple 2 x 1.000'],
      ['vane-pass', 'vane-pass', '5 vanes x 1.000'],
      ['fan-blades', 'blade-pass', '7 blades x 1.000'],
      ['mesh', 'gear-mesh', '23 teeth x 0.500'],
      ['bpfi', 'bearing-bpfi', 'BPFI 5.4152 (9 elements, d/D 0.2034, 0 deg) x 1.000'],
    ]);
    expect(orders[4].multiple).toBe(11.5);
    expect(orders[5].multiple).toBe(bearingOrders({ rollingElements: 9, elementDiameter: 0.3126, pitchDiameter: 1.537, contactAngleDeg: 0 }).bpfi);
  });

  it('tone without bearing does not apply; bearing without tone is missing it', () => {
    const ps = problemsOf(
      variant([
        ['{ id: 2x, multiple: 2 }', '{ id: 2x, multiple: 2, tone: bpfo }'],
        ['{ id: vane-pass, multiple: 5 }', '{ id: vane-pass, bearing: { rolling_elements: 8, element_diameter: 1, pitch_diameter: 5 } }'],
      ]),
    );
    expect(ps.map((p) => [p.code, p.path])).toEqual([
      ['QB_E_CONFIG_UNKNOWN_KEY', 'assets[0].orders[1].tone'],
      ['QB_E_CONFIG_MISSING', 'assets[0].orders[2].tone'],
    ]);
  });

  it('sensor sensitivity in mV per unit gives scale 1000/sensitivity', () => {
    const r = parseAssetMap(variant([['units: g }', 'units: g, sensitivity_mv_per_unit: 100 }']]), 't');
    expect(r.problems).toEqual([]);
    expect(r.map!.assets[0].sensors[0].scale).toBe(10);
  });

  it('channel bound twice between two sensors', () => {
    const ps = problemsOf(variant([['units: g }', 'units: g }\n      - { id: motor-top-y, channel: 0, units: g }']]));
    expect(ps.map((p) => [p.code, p.path])).toEqual([['QB_E_CONFIG_DUPLICATE', 'assets[0].sensors[1].channel']]);
    expect(ps[0].message).toMatch(/channel 0 is already bound to sensor 'motor-top-x'/);
  });

  it('speed from the spectrum needs an existing sensor; from a topic needs the topic', () => {
    const spectrum = problemsOf(variant([['source: tach          # tach | spectrum | topic (live agent)\n      channel: 1            # recording channel with the once-per-rev pulse\n      pulses_per_rev: 1\n', 'source: spectrum\n      sensor: motor-side\n']]));
    expect(spectrum.map((p) => [p.code, p.path])).toEqual([['QB_E_CONFIG_REFERENCE', 'assets[0].speed.sensor']]);
    const topic = problemsOf(variant([['source: tach          # tach | spectrum | topic (live agent)\n      channel: 1            # recording channel with the once-per-rev pulse\n      pulses_per_rev: 1\n', 'source: topic\n']]));
    expect(topic.map((p) => [p.code, p.path])).toEqual([['QB_E_CONFIG_MISSING', 'assets[0].speed.topic']]);
  });

  it('range_rpm: equal ends and zero are rejected', () => {
    expect(problemsOf(variant([['[450, 1200]', '[450, 450]']])).map((p) => p.path)).toEqual(['assets[0].speed.range_rpm']);
    expect(problemsOf(variant([['[450, 1200]', '[0, 1200]']])).map((p) => p.path)).toEqual(['assets[0].speed.range_rpm[0]']);
  });

  it('duplicate component id', () => {
    const ps = problemsOf(variant([['id: discharge-pipe', 'id: motor-reed']]));
    expect(ps.map((p) => [p.code, p.path])).toEqual([['QB_E_CONFIG_DUPLICATE', 'assets[0].components[1].id']]);
  });

  it('broker, analysis and severity blocks are read with their defaults', () => {
    const r = parseAssetMap(
      variant([['site: north-basin\n', 'site: north-basin\nbroker: { url: "mqtt://localhost:1883" }\n']], [
        '    analysis: { frame_size: 4096, decimation: 4 }',
        '    severity: { zone_boundaries_mm_s: [2.3, 4.5, 7.1], basis: site table 7 }',
        '',
      ].join('\n')),
      't',
    );
    expect(r.problems, describeProblems(r.problems)).toEqual([]);
    expect(r.map!.broker).toEqual({ url: 'mqtt://localhost:1883', topicPrefix: 'qband' });
    expect(r.map!.assets[0].analysis).toEqual({ frameSize: 4096, overlap: 0.5, averages: 4, decimation: 4, decisionStepS: 0.1 });
    expect(r.map!.assets[0].severity).toEqual({ zoneBoundariesMmS: [2.3, 4.5, 7.1], basis: 'site table 7' });
  });

  it('severity with boundaries but no basis: the basis is required', () => {
    const ps = problemsOf(variant([], '    severity: { zone_boundaries_mm_s: [2.3, 4.5, 7.1] }\n'));
    expect(ps.map((p) => [p.code, p.path])).toEqual([['QB_E_CONFIG_MISSING', 'assets[0].severity.basis']]);
  });

  it('key written with no value is a type problem at the key', () => {
    const ps = problemsOf(variant([['      pulses_per_rev: 1\n', '      pulses_per_rev:\n']]));
    expect(ps.map((p) => [p.code, p.path, p.line, p.col, p.found])).toEqual([
      ['QB_E_CONFIG_TYPE', 'assets[0].speed.pulses_per_rev', 9, 7, 'nothing'],
    ]);
  });
});

describe('asset map: input topics bound twice', () => {
  it('refuses a topic shared by two sensors, by a sensor and a tach, or across assets, with line and column', () => {
    const text = [
      'site: s',
      'assets:',
      '  - id: a',
      '    procedure: p',
      '    speed: { source: tach, channel: 1, topic: t/x, range_rpm: [450, 1200] }',
      '    orders: [{ id: 1x, multiple: 1 }]',
      '    sensors:',
      '      - { id: s1, channel: 0, units: g, topic: t/x }',
      '      - { id: s2, channel: 2, units: g, topic: t/y }',
      '    components: [{ id: c, fn_hz: 10, q: 5 }]',
      '    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }',
      '  - id: b',
      '    procedure: p',
      '    speed: { source: topic, topic: t/y, range_rpm: [450, 1200] }',
      '    orders: [{ id: 1x, multiple: 1 }]',
      '    sensors:',
      '      - { id: s1, channel: 0, units: g }',
      '    components: [{ id: c, fn_hz: 10, q: 5 }]',
      '    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }',
      '',
    ].join('\n');
    const { map, problems } = parseAssetMap(text, 'dup.yaml');
    expect(map).toBeNull();
    // Positions counted by hand in the text above (1-based line and column of the topic value).
    expect(problems.map((p) => [p.code, p.path, p.line, p.col])).toEqual([
      ['QB_E_CONFIG_DUPLICATE', 'assets[0].speed.topic', 5, 47],
      ['QB_E_CONFIG_DUPLICATE', 'assets[1].speed.topic', 14, 36],
    ]);
    expect(problems[1].message).toMatch(/already the input of sensor 's2' of asset 'a'/);
  });
});
