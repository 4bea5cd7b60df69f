/**
 * `qband identify` and the transient records of `qband replay`, on the demo recording of the
 * fictional cooling-water pump (config/demo-profile.yaml: a run-up 600 -> 852 rpm over 10..30 s,
 * 852 -> 950 -> 1100 rpm over 90..106 s, a coast-down 1100 -> 450 rpm over 151..181 s). Its
 * components were simulated with the demo map's fn and Q, so a map set off from those values
 * must draw a drift advisory. The accuracy of identification is checked against an independent
 * ODE model in identification.test.ts; these tests check the command and its records.
 */
import { mkdtempSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { ROOT, runCli } from './support/runCli.ts';
import { logDecrement, zetaFromLogDecrement } from '../src/identification/freeDecay.ts';
import { qFromBand, velocityHalfPowerBand, zetaFromQ } from '../src/physics/halfPowerBand.ts';


const run = runCli;

const lines = (out: string) => out.trim().split('\n').map((l) => JSON.parse(l) as Record<string, any>);

describe('qband replay: transient records', () => {
  it('writes a transient record for each run-up and coast-down, with the pinned fields', async () => {
    const { code, out } = await run(['replay', '--map', 'config/demo-map.yaml', 'demo/north-basin-runup.wav']);
    expect(code).toBe(0);
    const transients = lines(out).filter((r) => r.kind === 'transient');
    expect(transients.map((t) => t.direction)).toEqual(['up', 'up', 'down']);
    for (const t of transients) {
      for (const key of ['kind', 'asset', 'direction', 't_start_s', 't_end_s', 'speed_from_rpm', 'speed_to_rpm', 'orders']) expect(t).toHaveProperty(key);
      expect(t.asset).toBe('cw-pump-2');
    }
    // The profile's first ramp: 600 -> 852 rpm over 10..30 s.
    expect(Math.abs(transients[0].t_start_s - 10)).toBeLessThan(0.5);
    expect(Math.abs(transients[0].t_end_s - 30)).toBeLessThan(0.5);
    expect(Math.abs(transients[0].speed_to_rpm - 852)).toBeLessThan(10);
    // Speed steps fine enough for the narrowest band: motor-reed's 800-907 rpm band at 1X.
    const track = transients[0].orders.find((o: any) => o.order === '1x');
    const speeds = track.points.map((p: number[]) => p[1]);
    const steps = speeds.slice(1).map((v: number, i: number) => Math.abs(v - speeds[i]));
    expect(Math.max(...steps)).toBeLessThan((907 - 800) / 10);
    // The record says so itself: the narrowest band is discharge-pipe at vane pass (5X), about
    // (85.53 - 80.55) x 60 / 5 = 60 rpm wide (the demo map's comment gives the band).
    expect(transients[0].resolution.component).toBe('discharge-pipe');
    expect(Math.abs(transients[0].resolution.narrowest_band_rpm - 59.8)).toBeLessThan(1);
    expect(transients[0].resolution.speed_step_rpm).toBeLessThan(transients[0].resolution.narrowest_band_rpm / 4);
  });
});

describe('qband identify', () => {
  it('measures the demo components at the values they were simulated with, and finds no drift', async () => {
    const { code, out } = await run(['identify', '--map', 'config/demo-map.yaml', '--json', 'demo/north-basin-runup.wav']);
    expect(code).toBe(0);
    const records = lines(out);
    const identified = records.filter((r) => r.kind === 'identified');
    const reed = identified.find((r) => r.component === 'motor-reed');
    expect(reed).toBeDefined();
    for (const key of ['kind', 'asset', 'component', 'order', 'fn_hz', 'q', 'zeta', 'map_fn_hz', 'map_q']) expect(reed).toHaveProperty(key);
    expect(Math.abs(reed!.fn_hz - 14.2) / 14.2).toBeLessThan(0.005);
    expect(Math.abs(reed!.q - 8) / 8).toBeLessThan(0.1);
    expect(reed!.drift).toBeNull();
    expect(records.at(-1)!.kind).toBe('identify-summary');
  });

  it('shows the map lines to change when the map has drifted, and what that does to the crossings', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'qband-identify-'));
    const map = readFileSync(join(ROOT, 'config/demo-map.yaml'), 'utf8').replace('{ id: motor-reed, fn_hz: 14.2, q: 8, orders: [1x] }', '{ id: motor-reed, fn_hz: 13.4, q: 8, orders: [1x] }');
    writeFileSync(join(dir, 'map.yaml'), map);
    const { code, out } = await run(['identify', '--map', join(dir, 'map.yaml'), '--svg', join(dir, 'svg'), join(ROOT, 'demo/north-basin-runup.wav')]);
    expect(code).toBe(0);
    expect(out).toContain('drift: motor-reed measures fn 14.2');
    expect(out).toMatch(/the map has:\n\s+\d+: .*fn_hz: 13\.4/);
    expect(out).toMatch(/the measurement would have:\n\s+\d+: .*fn_hz: 14\.2/);
    expect(out).toMatch(/1x: stays in the operating range; its speed band moves from 7\d\d-8\d\d to 8\d\d-9\d\d rpm/);
    expect(out).toMatch(/confirm a measured band/);
    const svgs = readdirSync(join(dir, 'svg'));
    expect(svgs.some((f) => f.startsWith('cw-pump-2-motor-reed-1x'))).toBe(true);
    expect(readFileSync(join(dir, 'svg', svgs[0]), 'utf8')).toMatch(/^<svg xmlns="http:\/\/www.w3.org\/2000\/svg"/);
  });

  it('refuses a wrong command line with exit 2 and teaches with --help', async () => {
    expect((await run(['identify', 'demo/north-basin-runup.wav'])).code).toBe(2);
    const help = await run(['identify', '--help']);
    expect(help.code).toBe(0);
    expect(help.out).toContain('qband identify --map <map.yaml>');
    expect(help.out).toMatch(/never stops a machine/);
  });
});

describe('half-power method', () => {
  it('agrees with the textbook example: resonance at 100 Hz, half-power points at 98 and 102 Hz', () => {
    // A common textbook example form (recalled from memory): Q = fn / (f2 - f1) = 100 / 4 = 25,
    // zeta = (f2 - f1) / (2 fn) = 0.02 (worked by hand). For qband's velocity band the width is
    // exactly fn / Q; the displacement band's width agrees to first order in zeta.
    expect(qFromBand(98, 102, 100)).toBeCloseTo(25, 10);
    expect(zetaFromQ(qFromBand(98, 102, 100))).toBeCloseTo(0.02, 10);
    const [lo, hi] = velocityHalfPowerBand(100, 25);
    expect(hi - lo).toBeCloseTo(4, 10);
  });
});

describe('logarithmic decrement', () => {
  it('agrees with the textbook exercise: amplitude down to a quarter after five cycles', () => {
    // A common textbook exercise form (recalled from memory): the free-vibration amplitude falls
    // to 25 % in 5 cycles. delta = ln(4) / 5 = 0.2773 and zeta = delta / sqrt(4 pi^2 + delta^2)
    // = 0.0441 (worked by hand here).
    const delta = logDecrement(1, 0.25, 5);
    expect(delta).toBeCloseTo(0.2773, 4);
    expect(zetaFromLogDecrement(delta)).toBeCloseTo(0.0441, 4);
    // Light damping: Q = 1 / (2 zeta) ~ pi / delta, the number of cycles to fall by e^pi (common practice).
    expect(1 / (2 * zetaFromLogDecrement(delta))).toBeCloseTo(Math.PI / delta, 1);
  });
});
