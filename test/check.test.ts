import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { runCheck } from '../src/cli/check.ts';
import type { CliIo } from '../src/cli/io.ts';
import { velocityHalfPowerBand } from '../src/physics/halfPowerBand.ts';

const repo = fileURLToPath(new URL('..', import.meta.url));

function fakeIo(cwd = repo): CliIo & { out: () => string; err: () => string } {
  let out = '';
  let err = '';
  return {
    cwd,
    stdout: { write: (s: string) => (out += s) },
    stderr: { write: (s: string) => (err += s) },
    out: () => out,
    err: () => err,
  };
}

const BAD = `site: north-basin
assets:
  - id: cw-pump-2
    procedure: RM-12
    speed: { source: tach, channel: 1, range_rpm: [450, 1200] }
    orders:
      - { id: 1x, multiple: 1 }
    sensors:
      - { id: s1, channel: 0, units: g }
    components:
      - { id: reed, fn_hz: 0, q: 8 }
      - { id: pipe, fn_hz: 83, zeta: 0.03, orders: [7x] }
    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: hgih }
`;

function tempMap(text: string): { dir: string; name: string } {
  const dir = mkdtempSync(join(tmpdir(), 'qband-check-'));
  writeFileSync(join(dir, 'map.yaml'), text);
  return { dir, name: 'map.yaml' };
}

describe('qband check: exit codes', () => {
  it('0 for the example map, report on stdout, nothing on stderr', async () => {
    const io = fakeIo();
    expect(await runCheck(['config/example-map.yaml'], io)).toBe(0);
    expect(io.err()).toBe('');
    expect(io.out()).toMatch(/valid asset map for site north-basin/);
    expect(io.out()).toMatch(/velocity half-power band/);
    expect(io.out()).toMatch(/motor-reed\s+852\.0\s+800\.4-906\.9\s+inside/);
    expect(io.out()).toMatch(/procedures, local codes and licensed practice/);
  });

  it('1 for an invalid map, every problem on its own stderr line', async () => {
    const { dir, name } = tempMap(BAD);
    const io = fakeIo(dir);
    expect(await runCheck([name], io)).toBe(1);
    const lines = io.err().trimEnd().split('\n');
    const problems = lines.filter((l) => l.includes(' error '));
    // Columns found in the fixture text itself.
    const col = (line: number, text: string) => BAD.split('\n')[line - 1].indexOf(text) + 1;
    expect(problems).toEqual([
      `map.yaml: error QB_E_CONFIG_RANGE assets[0].components[0].fn_hz: must be a number > 0, got 0 (line 11, col ${col(11, '0, q')})`,
      `map.yaml: error QB_E_CONFIG_REFERENCE assets[0].components[1].orders[0]: must be one of the asset's order ids: 1x, got '7x' (line 12, col ${col(12, '7x')})`,
      `map.yaml: error QB_E_CONFIG_RANGE assets[0].alarm.priority: must be one of 'low', 'medium', 'high', 'urgent', got 'hgih' (line 13, col ${col(13, 'hgih')})`,
    ]);
    expect(lines.at(-1)).toBe('map.yaml: not valid, 3 problems');
    expect(io.out()).toBe('');
  });

  it('2 with no map, two maps or an unknown option (QB_E_USAGE)', async () => {
    for (const args of [[], ['a.yaml', 'b.yaml'], ['config/example-map.yaml', '--verbose']]) {
      const io = fakeIo();
      expect(await runCheck(args, io), args.join(' ')).toBe(2);
      expect(io.err()).toMatch(/QB_E_USAGE/);
    }
  });

  it('1 for a map file that cannot be read: missing or a directory (QB_E_FILE_READ)', async () => {
    for (const args of [['no/such/map.yaml'], ['config']]) {
      const io = fakeIo();
      expect(await runCheck(args, io), args.join(' ')).toBe(1);
      expect(io.err()).toMatch(/^qband check: cannot read asset map '.*' \((no such file|it is a directory)\) \[QB_E_FILE_READ\]\n$/);
    }
  });

  it('--help: exit 0, teaches the band definition and shows an example', async () => {
    const io = fakeIo();
    expect(await runCheck(['--help'], io)).toBe(0);
    expect(io.out()).toMatch(/velocity\s+half-power band/);
    expect(io.out()).toMatch(/fn\*\(sqrt\(1\+zeta\^2\) -\/\+ zeta\)/);
    expect(io.out()).toMatch(/qband check config\/example-map\.yaml/);
  });
});

describe('qband check --json', () => {
  it('keeps the pinned fields (snake_case) with values checked by hand', async () => {
    const io = fakeIo();
    expect(await runCheck(['config/example-map.yaml', '--json'], io)).toBe(0);
    const doc = JSON.parse(io.out());
    expect(doc.valid).toBe(true);
    expect(doc.problems).toEqual([]);
    const asset = doc.assets[0];
    expect(asset.id).toBe('cw-pump-2');
    expect(asset.components.map((c: { id: string }) => c.id)).toEqual(['motor-reed', 'discharge-pipe']);
    const reed = asset.components[0];
    expect(reed.fn_hz).toBe(14.2);
    expect(reed.q).toBe(8);
    expect(reed.zeta).toBe(0.0625);
    expect(reed.band_hz).toEqual(velocityHalfPowerBand(14.2, 8));
    // Band width fn/Q = 1.775 Hz (by hand).
    expect(reed.band_hz[1] - reed.band_hz[0]).toBeCloseTo(1.775, 12);

    const crossing = asset.crossings[0];
    expect(Object.keys(crossing)).toEqual(
      expect.arrayContaining(['order', 'component', 'speed_rpm', 'speed_band_rpm', 'af', 'required_margin_pct', 'actual_margin_pct', 'verdict']),
    );
    expect(crossing.order).toBe('1x');
    expect(crossing.component).toBe('motor-reed');
    // 14.2 Hz x 60 = 852 rpm; speed band = band x 60.
    expect(crossing.speed_rpm).toBeCloseTo(852, 9);
    expect(crossing.speed_band_rpm[0]).toBeCloseTo(reed.band_hz[0] * 60, 9);
    expect(crossing.speed_band_rpm[1]).toBeCloseTo(reed.band_hz[1] * 60, 9);
    expect(crossing.inside_range).toBe(true);
    expect(crossing.verdict).toBe('inside-range');
    expect(asset.crossings.map((c: { verdict: string }) => c.verdict)).toEqual(['inside-range', 'margin-ok', 'margin-ok', 'inside-range']);
  });

  it('an invalid map still prints JSON, with the problems, and exits 1', async () => {
    const { dir, name } = tempMap(BAD);
    const io = fakeIo(dir);
    expect(await runCheck([name, '--json'], io)).toBe(1);
    const doc = JSON.parse(io.out());
    expect(doc.valid).toBe(false);
    expect(doc.assets).toEqual([]);
    expect(doc.problems.map((p: { path: string }) => p.path)).toEqual([
      'assets[0].components[0].fn_hz',
      'assets[0].components[1].orders[0]',
      'assets[0].alarm.priority',
    ]);
    const col = BAD.split('\n')[10].indexOf('0, q') + 1;
    expect(doc.problems[0]).toMatchObject({ code: 'QB_E_CONFIG_RANGE', line: 11, col, expected: 'a number > 0', found: '0' });
  });
});
