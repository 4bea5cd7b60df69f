import { beforeAll, describe, expect, it } from 'vitest';
import type { AlarmRecord, EngineRecord, StatusRecord } from '../src/advisory/records.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../src/config/types.ts';
import { AssetEngine } from '../src/engine/assetEngine.ts';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';
import { chirpSignal, profileDurationS, type SpeedProfileHz } from './support/chirp.ts';

// A fan with no tach: speed from the vibration (speed source `spectrum`). It ramps at 3 % of its
// top speed per second into a panel's band, dwells there for longer than the on-delay, and ramps
// out at 10 %/s. The signal is synthesised here (test/support/chirp.ts: the shaft angle is the
// exact integral of the speed profile), not by qband's simulator. Every expected time is worked
// out below from the profile and the band, not read from qband.
const MAP = `
site: test-site
assets:
  - id: roof-fan-3
    procedure: "Test procedure"
    speed: { source: spectrum, sensor: fan-bearing, range_rpm: [600, 1800] }
    orders:
      - { id: 1x, multiple: 1 }
      - { id: 2x, multiple: 2 }
    sensors:
      - { id: fan-bearing, channel: 0, units: g }
    analysis: { frame_size: 8192, overlap: 0.5, averages: 4 }
    components:
      - { id: casing-panel, fn_hz: 20, q: 10, orders: [1x] }
    alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }
`;

const FS = 2560;
const TOP_RPM = 1800;
const RPM_PER_HZ = 60;
// 900 rpm for 5 s, up at 3 %/s of 1800 rpm (54 rpm/s) to 1200 rpm, 40 s there, out at 10 %/s
// (180 rpm/s) to 1600 rpm, 20 s there.
const UP_RPM_S = 0.03 * TOP_RPM;
const OUT_RPM_S = 0.1 * TOP_RPM;
const UP_START_S = 5;
const UP_END_S = UP_START_S + (1200 - 900) / UP_RPM_S;
const OUT_START_S = UP_END_S + 40;
const OUT_END_S = OUT_START_S + (1600 - 1200) / OUT_RPM_S;
const PROFILE: SpeedProfileHz = {
  startHz: 900 / RPM_PER_HZ,
  segments: [
    { durS: UP_START_S, toHz: 900 / RPM_PER_HZ },
    { durS: UP_END_S - UP_START_S, toHz: 1200 / RPM_PER_HZ },
    { durS: OUT_START_S - UP_END_S, toHz: 1200 / RPM_PER_HZ },
    { durS: OUT_END_S - OUT_START_S, toHz: 1600 / RPM_PER_HZ },
    { durS: 20, toHz: 1600 / RPM_PER_HZ },
  ],
};

// Velocity (mobility) half-power band of an SDOF: fn (sqrt(1 + zeta^2) -/+ zeta), zeta = 1 / (2 Q)
// (standard SDOF result, common practice; the band docs/engine.md defines).
const ZETA = 1 / 20;
const LO_HZ = 20 * (Math.sqrt(1 + ZETA ** 2) - ZETA);
const HI_HZ = 20 * (Math.sqrt(1 + ZETA ** 2) + ZETA);
const DEADBAND_HZ = 0.01 * 20;
// 1X enters the band on the way up, and leaves band and deadband on the way out.
const ENTER_S = UP_START_S + (LO_HZ * RPM_PER_HZ - 900) / UP_RPM_S;
const EXIT_S = OUT_START_S + ((HI_HZ + DEADBAND_HZ) * RPM_PER_HZ - 1200) / OUT_RPM_S;
const RAISE_S = ENTER_S + 30;
const CLEAR_S = EXIT_S + 10;
// Decisions every 0.1 s: an event lands on the first step at or after its exact time. The speed
// may be off by up to 0.3 % (the tolerance this test grants the tachless estimate near a ramp's
// end): 0.3 % of 1141 rpm is 3.4 rpm, 0.06 s of the 54 rpm/s ramp; of 1273 rpm on the 180 rpm/s
// ramp, 0.02 s.
const STEP_S = 0.1;
function expectOnTime(what: string, actualS: number | undefined, exactS: number, slackS: number): void {
  expect(actualS, `${what}: no event`).toBeDefined();
  const lateS = (actualS as number) - exactS;
  expect(lateS, `${what} at ${actualS} s, expected the first step at or after ${exactS.toFixed(3)} s (+- ${slackS} s)`).toBeGreaterThanOrEqual(-slackS);
  expect(lateS, `${what} at ${actualS} s, expected the first step at or after ${exactS.toFixed(3)} s (+- ${slackS} s)`).toBeLessThan(STEP_S + slackS);
}

describe('tachless dwell through ramps', () => {
  let asset: AssetConfig;
  let fft: RealFft;
  let records: EngineRecord[];
  let signal: Float32Array;
  function replay(block: number): EngineRecord[] {
    const engine = new AssetEngine(asset, { fft }, { statusEveryS: 0.5 });
    const out: EngineRecord[] = [];
    for (let i = 0; i < signal.length; i += block) out.push(...engine.pushChannel(0, i / FS, FS, signal.subarray(i, i + block)));
    return out;
  }
  beforeAll(async () => {
    const { map, problems } = parseAssetMap(MAP, 'tachless-fan.yaml');
    expect(problems).toEqual([]);
    asset = map!.assets[0];
    fft = await createRealFft(asset.analysis.frameSize);
    const x = chirpSignal({
      profile: PROFILE,
      rateHz: FS,
      refHz: TOP_RPM / RPM_PER_HZ,
      // Demo levels (config/demo-profile.yaml): 1X 0.02 g and 2X 0.005 g at the top speed,
      // growing with speed squared, a constant tone at 3.62X, white noise 0.002 g.
      orders: [
        { multiple: 1, peakG: 0.02, scaling: 'speed2' },
        { multiple: 2, peakG: 0.005, scaling: 'speed2' },
        { multiple: 3.62, peakG: 0.003, scaling: 'constant' },
      ],
      noiseG: 0.002,
      structural: { fnHz: 20, q: 10, levelG: 0.001 },
      seed: 5,
    });
    signal = x;
    records = replay(256);
  });

  it('knows the speed through both ramps (speed_state ok from the first estimates to the end)', () => {
    const status = records.filter((r): r is StatusRecord => r.kind === 'status');
    const unknown = status.filter((s) => s.t_s >= 3 && s.speed_state !== 'ok').map((s) => `${s.t_s}: ${s.speed_state}`);
    expect(unknown).toEqual([]);
    expect(status[status.length - 1].t_s).toBeGreaterThan(profileDurationS(PROFILE) - 2);
  });

  it('raises on-delay after 1X entered the band, counted from the entry on the ramp', () => {
    const raise = records.find((r): r is AlarmRecord => r.kind === 'alarm' && r.event === 'raise');
    expectOnTime('raise', raise?.t_s, RAISE_S, 0.06);
    expect(records.filter((r) => r.kind === 'alarm' && r.event === 'raise')).toHaveLength(1);
  });

  it('clears off-delay after 1X left band and deadband on the faster ramp out', () => {
    const clear = records.find((r): r is AlarmRecord => r.kind === 'alarm' && r.event === 'clear');
    expectOnTime('clear', clear?.t_s, CLEAR_S, 0.02);
  });

  it('gives the same records whatever the block size', () => {
    expect(replay(1111)).toEqual(records);
  });
});
