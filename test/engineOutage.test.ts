import { readFileSync } from 'node:fs';
import { beforeAll, describe, expect, it } from 'vitest';
import type { AlarmRecord, EngineRecord } from '../src/advisory/records.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../src/config/types.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';
import { parseProfile } from '../src/simulation/profile.ts';
import { synthesize } from '../src/simulation/synthesize.ts';

// The pump holds 1X at 852 rpm (14.2 Hz, the reed's fn) from the start: it is in the band all run.
const PROFILE = `
sample_rate_hz: 2560
start_rpm: 852
segments:
  - { hold_s: 70 }
forcing: { 1x: 0.02 }
noise_g: 0.002
seed: 3
`;

// The same, except that from 55 s it ramps to 950 rpm over 2 s: 1X leaves the reed band plus its
// 1 % deadband (15.115 + 0.142 Hz = 915.4 rpm) at 55 + (915.4 - 852) / 98 x 2 = 56.29 s.
const LEAVING = PROFILE.replace('  - { hold_s: 70 }', '  - { hold_s: 55 }\n  - { ramp_to_rpm: 950, over_s: 2 }\n  - { hold_s: 13 }');
const LEAVE_S = 55 + ((60 * (15.1152 + 0.142) - 852) / 98) * 2;

let asset: AssetConfig;
let fft: RealFft;
let blocks: Array<{ t0S: number; channels: Float32Array[] }>;
let leavingBlocks: Array<{ t0S: number; channels: Float32Array[] }>;
const FS = 2560;

beforeAll(async () => {
  const text = readFileSync(new URL('../config/demo-map.yaml', import.meta.url), 'utf8');
  asset = parseAssetMap(text, 'demo-map.yaml').map!.assets[0];
  fft = await createRealFft(asset.analysis.frameSize);
  blocks = [...synthesize(asset, parseProfile(PROFILE).profile!, { framesPerBlock: 1280 })]; // 0.5 s blocks
  leavingBlocks = [...synthesize(asset, parseProfile(LEAVING).profile!, { framesPerBlock: 1280 })];
});

function run(keep: (t0S: number) => boolean, mutate?: (b: { t0S: number; channels: Float32Array[] }) => Float32Array[]) {
  const engine = new AssetEngine(asset, { fft });
  const out: EngineRecord[] = [];
  for (const b of blocks) {
    if (!keep(b.t0S)) continue;
    out.push(...engine.pushBlock(b.t0S, FS, mutate ? mutate(b) : b.channels));
  }
  return { alarms: out.filter((r): r is AlarmRecord => r.kind === 'alarm'), summary: engine.summary() };
}

describe('engine through data outages', () => {
  it('stops the on-delay while no data arrives: a 20 s outage delays the raise by 20 s of data time', () => {
    const continuous = run(() => true).alarms.find((a) => a.event === 'raise')!;
    // Data from 0 to 20 s, nothing from 20 to 40 s, data again from 40 s.
    const outage = run((t0S) => t0S < 20 || t0S >= 40);
    const raise = outage.alarms.find((a) => a.event === 'raise')!;
    // After the outage the tach needs a few revolutions (0.07 s each at 852 rpm) before the
    // speed is known again; the clock is stopped meanwhile too. Allow 0.5 s for that.
    const delayS = raise.t_s - continuous.t_s;
    expect(delayS, `raise at ${raise.t_s} s with the outage, ${continuous.t_s} s without`).toBeGreaterThanOrEqual(20);
    expect(delayS).toBeLessThan(20.5);
    expect(raise.dwell_s).toBeGreaterThanOrEqual(30);
    expect(raise.dwell_s).toBeLessThan(30.2);
    expect(outage.summary.data.outage_s).toBeCloseTo(20, 0);
  });

  it('jumps over an outage of decades (a sender clock error) instead of stepping through it', () => {
    const engine = new AssetEngine(asset, { fft });
    // Ten seconds stamped at the epoch, then the rest stamped 50 years later: stepping through
    // the gap at 0.1 s would take 1.6e10 steps; the engine must skip it at once.
    const later = 50 * 365.25 * 86_400;
    for (const b of blocks) engine.pushBlock(b.t0S < 10 ? b.t0S : b.t0S + later, FS, b.channels);
    const summary = engine.summary();
    expect(summary.data.outage_s).toBeGreaterThan(later - 1);
    expect(summary.events.raise).toBe(1);
  });

  it('keeps deciding on time while shedding spectra under overload, and counts the shed blocks', () => {
    const continuous = run(() => true).alarms.find((a) => a.event === 'raise')!;
    const engine = new AssetEngine(asset, { fft });
    const alarms: AlarmRecord[] = [];
    for (const b of blocks) {
      engine.shedSpectra = b.t0S >= 5; // overloaded from 5 s on
      alarms.push(...engine.pushBlock(b.t0S, FS, b.channels).filter((r): r is AlarmRecord => r.kind === 'alarm'));
    }
    const raise = alarms.find((a) => a.event === 'raise')!;
    // Speed comes from the tach, so the dwell decision is exactly the same...
    expect(raise.t_s).toBe(continuous.t_s);
    // ...but no spectrum measured the order meanwhile.
    expect(raise.amplitude).toBeNull();
    expect(engine.shedBlocks).toBe(blocks.filter((b) => b.t0S >= 5).length);
  });

  it('survives a block of NaN samples without throwing, and still raises', () => {
    const { alarms, summary } = run(
      () => true,
      (b) => (b.t0S === 10 ? b.channels.map((c, i) => (i === 0 ? new Float32Array(c.length).fill(Number.NaN) : c)) : b.channels),
    );
    expect(summary.data.non_finite_spectra).toBeGreaterThan(0);
    expect(alarms.map((a) => a.event)).toContain('raise');
  });
});

describe('engine snapshot and restore (agent restart, map reload)', () => {
  function feed(engine: AssetEngine, from: number, to: number, source = blocks) {
    const out: EngineRecord[] = [];
    for (const b of source) if (b.t0S >= from && b.t0S < to) out.push(...engine.pushBlock(b.t0S, FS, b.channels));
    return out.filter((r): r is AlarmRecord => r.kind === 'alarm');
  }
  const viaJson = <T>(x: T): T => JSON.parse(JSON.stringify(x));

  it('resumes a pending on-delay: 20 s into a 30 s on-delay, raised about 10 s of data after resuming', () => {
    const before = new AssetEngine(asset, { fft });
    expect(feed(before, 0, 20)).toEqual([]);
    const snap = viaJson(before.snapshot());
    const after = new AssetEngine(asset, { fft });
    expect(after.restore(snap).fresh).toEqual([]);
    const raise = feed(after, 40, 70).find((a) => a.event === 'raise')!;
    const continuous = run(() => true).alarms.find((a) => a.event === 'raise')!;
    // Same 20 s delay as the outage (the restart is an outage from the data's point of view),
    // plus the tach's warm-up on a fresh engine: the first 0.27 s (a revolution at half the
    // minimum speed) are ignored and each point waits for the next pulse; the last decisions
    // before the stop were waiting for that too. Under a second in all.
    expect(raise.t_s - continuous.t_s).toBeGreaterThanOrEqual(20);
    expect(raise.t_s - continuous.t_s).toBeLessThan(21);
    expect(raise.dwell_s).toBeGreaterThanOrEqual(30);
  });

  it('does not raise again an alarm that was active before the restart, and clears it later', () => {
    const before = new AssetEngine(asset, { fft });
    expect(feed(before, 0, 40, leavingBlocks).map((a) => a.event)).toEqual(['raise']);
    const after = new AssetEngine(asset, { fft });
    after.restore(viaJson(before.snapshot()));
    // Still inside the band from 45 s: nothing new while the alarm stays active.
    expect(feed(after, 45, 55, leavingBlocks)).toEqual([]);
    expect(after.summary().still_active.map((a) => a.component)).toEqual(['motor-reed']);
    // Leaving the band at 56.29 s: the restored alarm clears after the 10 s off-delay, on the
    // first decision step at or after 66.29 s (the tach speed, averaged over 4 revolutions of
    // 0.063 s, lags the ramp by up to about 0.25 s: allowed on top).
    const later = feed(after, 55, 70, leavingBlocks);
    expect(later.map((a) => [a.event, a.component, a.order])).toEqual([['clear', 'motor-reed', '1x']]);
    const offDelayS = asset.alarm.offDelayS;
    expect(later[0].t_s, `clear at ${later[0].t_s} s; leaving at ${LEAVE_S} s + off-delay ${offDelayS} s`).toBeGreaterThanOrEqual(LEAVE_S + offDelayS - 1e-6);
    expect(later[0].t_s).toBeLessThan(LEAVE_S + offDelayS + 0.1 + 0.25);
    expect(after.summary().still_active).toEqual([]);
    expect(after.summary().events).toMatchObject({ raise: 1, clear: 1 });
  });

  it('starts a pair afresh when its alarm settings changed, keeping exposure of unchanged components', () => {
    const before = new AssetEngine(asset, { fft });
    feed(before, 0, 40);
    const changed: AssetConfig = { ...asset, alarm: { ...asset.alarm, onDelayS: 60 } };
    const after = new AssetEngine(changed, { fft });
    const { restored, fresh } = after.restore(viaJson(before.snapshot()));
    expect(restored).toEqual([]);
    expect(fresh).toContain('motor-reed/1x');
    const reed = after.summary().exposure.find((e) => e.component === 'motor-reed')!;
    expect(reed.seconds_in_band).toBeGreaterThan(39);
  });
});
