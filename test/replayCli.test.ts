import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ROOT, runCli } from './support/runCli.ts';


const run = runCli;

const lines = (out: string) => out.trim().split('\n').map((l) => JSON.parse(l));

// The demo recording's story is described in config/demo-map.yaml and config/demo-profile.yaml:
// 1X enters the motor-reed band at about 25.9 s (800.4 rpm on the 600 -> 852 rpm ramp over
// 10..30 s) and leaves it beyond the deadband at about 96.5 s (915.4 rpm on the 852 -> 950 rpm
// ramp over 90..100 s); on-delay 30 s, off-delay 10 s. Hand calculation from the profile.
describe('qband replay', () => {
  it('replays the demo recording: one raise near 55.9 s, one clear near 106.5 s, then a summary', async () => {
    const { code, out } = await run(['replay', '--map', 'config/demo-map.yaml', 'demo/north-basin-runup.wav']);
    expect(code).toBe(0);
    const records = lines(out);
    const alarms = records.filter((r) => r.kind === 'alarm');
    expect(alarms.map((a) => [a.event, a.component, a.order])).toEqual([
      ['raise', 'motor-reed', '1x'],
      ['clear', 'motor-reed', '1x'],
    ]);
    expect(Math.abs(alarms[0].t_s - 55.9)).toBeLessThanOrEqual(0.15);
    expect(Math.abs(alarms[1].t_s - 106.5)).toBeLessThanOrEqual(0.15);
    for (const a of alarms) {
      expect(a.procedure).toContain('RM-12');
      expect(a.advice).toMatch(/never stops the machine/);
    }
    expect(records.at(-1).kind).toBe('summary');
  });

  it('gives the same alarms from the recorded speed series (--speed) as from the tach', async () => {
    const tach = lines((await run(['replay', '--map', 'config/demo-map.yaml', 'demo/north-basin-runup.wav'])).out);
    const series = lines(
      (await run(['replay', '--map', 'config/demo-map.yaml', '--speed', 'demo/north-basin-runup-speed.csv', 'demo/north-basin-runup.wav'])).out,
    );
    const pick = (rs: any[]) => rs.filter((r) => r.kind === 'alarm').map((r) => [r.event, r.component, r.order]);
    expect(pick(series)).toEqual(pick(tach));
    const t = (rs: any[]) => rs.filter((r) => r.kind === 'alarm').map((r) => r.t_s);
    // The series is sampled every 0.1 s and interpolated; the tach averages 4 revolutions:
    // the two agree to a decision step.
    t(series).forEach((ts, i) => expect(Math.abs(ts - t(tach)[i])).toBeLessThanOrEqual(0.1 + 1e-9));
    expect(series.at(-1).speed.source).toBe('series');
  });

  it('replays the demo recording without its tach (speed source spectrum): the same raise and clear, speed known throughout', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'qband-tachless-'));
    const map = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8').replace(
      'speed: { source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [450, 1200] }',
      'speed: { source: spectrum, sensor: motor-top-x, range_rpm: [450, 1200] }',
    );
    expect(map).toContain('source: spectrum');
    writeFileSync(join(dir, 'map.yaml'), map);
    const { code, out } = await run(['replay', '--map', join(dir, 'map.yaml'), 'demo/north-basin-runup.wav']);
    expect(code).toBe(0);
    const records = lines(out);
    const alarms = records.filter((r) => r.kind === 'alarm');
    expect(alarms.map((a) => a.event)).toEqual(['raise', 'clear']);
    // The hand-computed times above (55.9 s, 106.5 s), to the same 0.15 s as with the tach.
    expect(Math.abs(alarms[0].t_s - 55.9)).toBeLessThanOrEqual(0.15);
    expect(Math.abs(alarms[1].t_s - 106.5)).toBeLessThanOrEqual(0.15);
    const summary = records.at(-1);
    expect(summary.speed.source).toBe('spectrum');
    // Unknown only until the first frame is complete (about 1.4 s at 450 rpm as the range's bottom).
    expect(summary.speed.unknown_s).toBeLessThan(1.5);
  });

  it('writes status records every --status-every seconds of recording time', async () => {
    const records = lines((await run(['replay', '--map', 'config/demo-map.yaml', '--status-every', '20', 'demo/north-basin-runup.wav'])).out);
    const times = records.filter((r) => r.kind === 'status').map((r) => r.t_s);
    expect(times).toEqual([20, 40, 60, 80, 100, 120, 140, 160, 180]);
  });

  it('refuses a recording that lacks a channel the map binds, naming it (exit 1)', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'qband-replay-'));
    const csv = join(dir, 'one-channel.csv');
    writeFileSync(csv, 'time_s,motor\n' + Array.from({ length: 100 }, (_, i) => `${(i / 1000).toFixed(3)},0`).join('\n') + '\n');
    const { code, err } = await run(['replay', '--map', 'config/demo-map.yaml', csv]);
    expect(code).toBe(1);
    expect(err).toMatch(/channel\(s\) 1 .*1 channel\(s\).*QB_E_CHANNEL_MISSING/);
  });

  it('reports a bad map with every problem and exits 1', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'qband-replay-'));
    const map = join(dir, 'bad.yaml');
    writeFileSync(map, 'site: x\nassets:\n  - id: a\n    speed: { source: tach }\n');
    const { code, err } = await run(['replay', '--map', map, 'demo/north-basin-runup.wav']);
    expect(code).toBe(1);
    expect(err.split('\n').filter((l) => l.includes('QB_E_CONFIG')).length).toBeGreaterThan(2);
  });

  it('teaches with --help and exits 2 on a wrong command line', async () => {
    const help = await run(['replay', '--help']);
    expect(help.code).toBe(0);
    expect(help.out).toMatch(/--status-every/);
    expect(help.out).toMatch(/never stops a machine/);
    expect((await run(['replay', 'demo/north-basin-runup.wav'])).code).toBe(2);
    expect((await run(['replay', '--map', 'config/demo-map.yaml', '--status-every', 'soon', 'x.wav'])).code).toBe(2);
    expect((await run(['replay', '--map', 'config/demo-map.yaml', '--bogus', 'x.wav'])).code).toBe(2);
  });

  it('prints readable lines with --format text', async () => {
    const { code, out } = await run(['replay', '--map', 'config/demo-map.yaml', '--format', 'text', 'demo/north-basin-runup.wav']);
    expect(code).toBe(0);
    expect(out).toMatch(/ALARM RAISED \[high\] motor-reed \/ 1x/);
    expect(out).toMatch(/alarm cleared/);
    expect(out).toMatch(/^summary for cw-pump-2/m);
  });
});
