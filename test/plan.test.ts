/**
 * `qband plan`: skip bands on a worked example whose edges are computed by hand below (measured
 * bands given as band_hz, so no band formula is involved), the drive frequency against the
 * synchronous-speed relation of an induction motor (common practice), the diagram's positions
 * against the crossings `qband check` reports, and the warnings.
 */
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { runCheck } from '../src/cli/check.ts';
import type { CliIo } from '../src/cli/io.ts';
import { runPlan } from '../src/cli/plan.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { assetPlan } from '../src/physics/assetPlan.ts';
import { motorHzPerRpm } from '../src/physics/skipBands.ts';
import { interferenceChart } from '../src/render/interferenceDiagram.ts';
import { scaleOf } from '../src/render/svgChart.ts';

const repo = fileURLToPath(new URL('..', import.meta.url));

function fakeIo(cwd = repo): CliIo & { out: () => string; err: () => string } {
  let out = '';
  let err = '';
  return { cwd, stdout: { write: (s: string) => (out += s) }, stderr: { write: (s: string) => (err += s) }, out: () => out, err: () => err };
}

// A fictional fan: two measured bands near each other that 1X crosses, and 2X through the first
// just below the operating range.
const WORKED = `site: test-site
assets:
  - id: fan-1
    procedure: "Test procedure T-1"
    speed: { source: tach, channel: 1, range_rpm: [600, 1800] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: 2x, multiple: 2 }
    sensors:
      - { id: s1, channel: 0, units: g }
    components:
      - { id: panel, fn_hz: 20, band_hz: [19, 21], orders: [1x, 2x] }
      - { id: duct, fn_hz: 22, band_hz: [21.5, 22.5], orders: [1x] }
    alarm: { on_delay_s: 10, off_delay_s: 5, deadband_pct: 2, priority: high }
    drive: { motor_poles: 4, slip_pct: 2, normal_rpm: 1200, min_usable_pct: 80 }
`;

function tempFile(name: string, text: string): string {
  const dir = mkdtempSync(join(tmpdir(), 'qband-plan-'));
  const path = join(dir, name);
  writeFileSync(path, text);
  return path;
}

describe('skip bands, worked by hand', () => {
  // Margin: deadband 2 % + tach uncertainty 0.1 % = 2.1 % of each crossing speed per side.
  //   1x panel: Nc = 20*60 = 1200 rpm, band 19..21 Hz = 1140..1260 rpm, widen 25.2 -> 1114.8..1285.2
  //   1x duct:  Nc = 1320 rpm, band 1290..1350 rpm, widen 27.72 -> 1262.28..1377.72 (overlaps: merged)
  //   2x panel: Nc = 600 rpm, band 570..630 rpm, widen 12.6 -> 557.4..642.6 (reaches into the range)
  // Usable: 1200 rpm of range less (642.6 - 600) and (1377.72 - 1114.8) = 894.48 rpm = 74.54 %.
  // Drive: 4 poles, 2 % slip. A 4-pole motor turns 1500 rpm synchronous at 50 Hz, 1470 rpm at
  // 2 % slip (common practice), so 50 Hz / 1470 rpm per rpm: 1114.8 -> 37.918 Hz, 1377.72 -> 46.861 Hz.
  const map = parseAssetMap(WORKED, 'worked.yaml').map!;
  const plan = assetPlan(map.assets[0]);

  it('widens, merges and measures the usable range', () => {
    expect(plan.marginPct).toBeCloseTo(2.1, 12);
    expect(plan.skipBands.map((b) => [b.loRpm, b.hiRpm])).toEqual([
      [expect.closeTo(557.4, 9), expect.closeTo(642.6, 9)],
      [expect.closeTo(1114.8, 9), expect.closeTo(1377.72, 9)],
    ]);
    expect(plan.skipBands[1].crossings).toEqual(['1x x panel', '1x x duct']);
    expect(plan.usablePct).toBeCloseTo(74.54, 9);
  });

  it('gives the drive frequency of an induction motor', () => {
    expect(motorHzPerRpm(4, 2) * 1470).toBeCloseTo(50, 9);
    expect(motorHzPerRpm(2, 0) * 3000).toBeCloseTo(50, 9);
    expect(plan.hzPerRpm! * 1114.8).toBeCloseTo(37.918, 3);
    expect(plan.hzPerRpm! * 1377.72).toBeCloseTo(46.861, 3);
  });

  it('warns of a small usable range and a normal point inside a band', () => {
    expect(plan.warnings.map((w) => w.code)).toEqual(['QB_E_PLAN_RANGE_USABLE', 'QB_E_PLAN_NORMAL_SKIPPED']);
  });

  it('prints the pinned JSON and drive frequencies rounded outward to 0.1 Hz', async () => {
    const io = fakeIo();
    expect(await runPlan(['--map', tempFile('m.yaml', WORKED), '--json'], io)).toBe(0);
    const json = JSON.parse(io.out());
    const a = json.assets[0];
    expect(a.skip_bands_rpm).toHaveLength(2);
    expect(a.skip_bands_rpm[1][0]).toBeCloseTo(1114.8, 9);
    expect(a.skip_bands_rpm[1][1]).toBeCloseTo(1377.72, 9);
    expect(a.skip_bands_drive_hz[1]).toEqual([37.9, 46.9]);
    expect(io.err()).toContain('warning QB_E_PLAN_NORMAL_SKIPPED');
  });
});

describe('the interference diagram against check', () => {
  const mapPath = join(repo, 'config/demo-map.yaml');

  it('puts every crossing, speed band and skip band where check and the JSON say', async () => {
    const checkIo = fakeIo();
    expect(await runCheck([mapPath, '--json'], checkIo)).toBe(0);
    const crossings = JSON.parse(checkIo.out()).assets[0].crossings as Array<{ order: string; component: string; speed_rpm: number; fn_hz: number; speed_band_rpm: [number, number]; verdict: string }>;
    const svgPath = tempFile('plan.svg', '');
    const io = fakeIo();
    expect(await runPlan(['--map', mapPath, '--json', '--svg', svgPath], io)).toBe(0);
    const plan = JSON.parse(io.out()).assets[0];
    const svg = readFileSync(svgPath, 'utf8');
    expect(svg).not.toMatch(/<script|href=|@import|url\(http/);

    const chart = interferenceChart(assetPlan(parseAssetMap(readFileSync(mapPath, 'utf8'), mapPath).map!.assets[0]));
    const s = scaleOf(chart);
    let drawn = 0;
    for (const c of crossings) {
      const id = `crossing-${c.order}-${c.component}`;
      const mark = new RegExp(`<g class="mark" data-id="${id}" data-x="([\\d.e+-]+)" data-y="([\\d.e+-]+)">`).exec(svg);
      if (c.speed_rpm > chart.x.max) {
        expect(mark, `${id} is beyond the chart`).toBeNull();
        expect(svg).toContain(`${c.order} x ${c.component} crosses at ${Math.round(c.speed_rpm)} rpm, beyond this chart`);
        continue;
      }
      drawn++;
      expect(Number(mark![1])).toBeCloseTo(c.speed_rpm, 9);
      expect(Number(mark![2])).toBeCloseTo(c.fn_hz, 9);
      const span = new RegExp(`<line class="span" data-id="${id}" data-from="([\\d.e+-]+)" data-to="([\\d.e+-]+)" x1="([\\d.]+)" y1="([\\d.]+)" x2="([\\d.]+)"`).exec(svg)!;
      expect([Number(span[1]), Number(span[2])]).toEqual([expect.closeTo(c.speed_band_rpm[0], 9), expect.closeTo(c.speed_band_rpm[1], 9)]);
      expect(Number(span[3])).toBeCloseTo(s.x(c.speed_band_rpm[0]), 1);
      expect(Number(span[5])).toBeCloseTo(s.x(c.speed_band_rpm[1]), 1);
      expect(Number(span[4])).toBeCloseTo(s.y(c.fn_hz), 1);
      // The verdict in words, not colour alone.
      expect(svg).toContain(c.verdict === 'inside-range' ? `${Math.round(c.speed_rpm)} rpm (${Math.round(c.speed_band_rpm[0])}-${Math.round(c.speed_band_rpm[1])}): inside the operating range` : `${Math.round(c.speed_rpm)} rpm`);
    }
    expect(drawn).toBe(3);
    for (const [lo, hi] of plan.skip_bands_rpm as Array<[number, number]>) {
      const strip = new RegExp(`<rect class="strip" data-id="skip-${Math.round(lo)}" data-from="([\\d.e+-]+)" data-to="([\\d.e+-]+)" x="([\\d.]+)" y="[\\d.]+" width="([\\d.]+)"`).exec(svg)!;
      expect(Number(strip[1])).toBeCloseTo(lo, 9);
      expect(Number(strip[2])).toBeCloseTo(hi, 9);
      expect(Number(strip[3])).toBeCloseTo(s.x(lo), 1);
      expect(Number(strip[3]) + Number(strip[4])).toBeCloseTo(s.x(hi), 1);
    }
    // Every crossing whose speed band reaches into the range gives (part of) a skip band.
    for (const c of crossings.filter((x) => x.speed_band_rpm[1] >= 450 && x.speed_band_rpm[0] <= 1200)) {
      expect((plan.skip_bands_rpm as Array<[number, number]>).some(([lo, hi]) => lo <= c.speed_band_rpm[0] && hi >= c.speed_band_rpm[1])).toBe(true);
    }
  });

  it('gives the drive its skip frequencies: 6 poles at 1.5 % slip', async () => {
    // 6 poles: 1000 rpm synchronous at 50 Hz (common practice); at 1.5 % slip 985 rpm per 50 Hz.
    const withDrive = `${readFileSync(mapPath, 'utf8').trimEnd()}\n    drive: { motor_poles: 6, slip_pct: 1.5, normal_rpm: 1100 }\n`;
    const io = fakeIo();
    expect(await runPlan(['--map', tempFile('drive.yaml', withDrive)], io)).toBe(0);
    const perRpm = 50 / 985;
    expect(io.out()).toContain(`${(Math.floor(791.04 * perRpm * 10) / 10).toFixed(1)}-${(Math.ceil(916.28 * perRpm * 10) / 10).toFixed(1)} Hz`);
    expect(io.out()).toContain('normally 1100 rpm');
    expect(io.err()).toBe('');
  });

  it('check points to plan where crossings lie in the range', async () => {
    const io = fakeIo();
    expect(await runCheck([mapPath], io)).toBe(0);
    expect(io.out()).toContain('qband plan --map <map> --asset cw-pump-2');
    const json = fakeIo();
    expect(await runCheck([mapPath, '--json'], json)).toBe(0);
    expect(JSON.parse(json.out()).assets[0].plan_command).toBe('qband plan --map <map> --asset cw-pump-2');
    // A map whose crossings all lie outside the range is not pointed to plan.
    const clear = fakeIo();
    expect(await runCheck([tempFile('clear.yaml', readFileSync(mapPath, 'utf8').replace('range_rpm: [450, 1200]', 'range_rpm: [450, 700]').replace('fn_hz: 83.0', 'fn_hz: 183.0'))], clear)).toBe(0);
    expect(clear.out()).not.toContain('qband plan');
  });
});

describe('drive keys and the command line', () => {
  it('refuses a direct factor together with the motor, and an odd pole count', () => {
    const both = parseAssetMap(WORKED.replace('motor_poles: 4, slip_pct: 2', 'motor_poles: 4, hz_per_rpm: 0.034'), 'x.yaml');
    expect(both.map).toBeNull();
    expect(both.problems.map((p) => p.code)).toContain('QB_E_CONFIG_CONFLICT');
    const odd = parseAssetMap(WORKED.replace('motor_poles: 4', 'motor_poles: 3'), 'x.yaml');
    expect(odd.problems.map((p) => p.code)).toContain('QB_E_CONFIG_RANGE');
    expect(odd.problems[0].line).toBe(15);
  });

  it('without a drive block gives rpm only and says how to get drive frequencies', async () => {
    const io = fakeIo();
    expect(await runPlan(['--map', 'config/demo-map.yaml'], io)).toBe(0);
    expect(io.out()).toContain('791-917 rpm');
    expect(io.out()).toContain('add drive.motor_poles or drive.hz_per_rpm');
    expect(io.out()).toContain("Skip bands are advice for the site's engineers");
  });

  it('refuses a command line without --map (exit 2) and an unknown asset (exit 1)', async () => {
    const io = fakeIo();
    expect(await runPlan([], io)).toBe(2);
    expect(io.err()).toContain('QB_E_USAGE');
    const io2 = fakeIo();
    await expect(runPlan(['--map', 'config/demo-map.yaml', '--asset', 'nope'], io2)).rejects.toThrow(/no asset/);
  });
});
