import { readFileSync } from 'node:fs';
import { resolve } from 'node:path';
import { beforeAll, describe, expect, it } from 'vitest';
import { AssetRuntime } from '../src/agent/assetRuntime.ts';
import { main } from '../src/cli/main.ts';
import type { CliIo } from '../src/cli/io.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { SHORT_RUN_RAISE_S, shortRunBlocks, tempDir, writeTestMap } from './support/liveRig.ts';

// A sensor fed only over MQTT needs no recording channel: the live agent finds its blocks by
// topic. Replay and simulate, which need one, refuse such an asset and say which sensor it is.
const ROOT = resolve(new URL('..', import.meta.url).pathname);
const withoutChannel = (text: string) => text.replace('{ id: motor-top-x, channel: 0, units: g }', '{ id: motor-top-x, units: g }');
let mapPath: string;

beforeAll(() => {
  mapPath = writeTestMap(tempDir(), 'qband', 'mqtt://127.0.0.1:1', withoutChannel);
  expect(readFileSync(mapPath, 'utf8')).toContain('{ id: motor-top-x, units: g }');
});

async function run(args: string[]): Promise<{ code: number; err: string }> {
  let err = '';
  const io: CliIo = { stdout: { write: () => undefined }, stderr: { write: (s: string) => (err += s), isTTY: false }, cwd: ROOT };
  return { code: await main(args, io), err };
}

describe('a sensor without a recording channel', () => {
  it('is valid; it gets an internal channel above every bound one (the tach is on 1)', () => {
    const { map, problems } = parseAssetMap(readFileSync(mapPath, 'utf8'), mapPath);
    expect(problems).toEqual([]);
    const sensor = map!.assets[0].sensors[0];
    expect(sensor).toMatchObject({ id: 'motor-top-x', liveOnly: true, channel: 2 });
    expect(map!.assets[0].speed.channel).toBe(1);
  });

  it('gives two such sensors distinct internal channels, and leaves bound sensors as written', () => {
    const text = readFileSync(mapPath, 'utf8').replace(
      '{ id: motor-top-x, units: g }',
      '{ id: motor-top-x, units: g }\n      - { id: pump-top-y, units: g }\n      - { id: pump-base, channel: 5, units: g }',
    );
    const { map, problems } = parseAssetMap(text, 'map.yaml');
    expect(problems).toEqual([]);
    expect(map!.assets[0].sensors.map((s) => [s.id, s.channel, s.liveOnly ?? false])).toEqual([
      ['motor-top-x', 6, true],
      ['pump-top-y', 7, true],
      ['pump-base', 5, false],
    ]);
  });

  it('is fed by the live runtime from its topic: spectra, severity and the raise as with a channel', async () => {
    const map = parseAssetMap(readFileSync(mapPath, 'utf8'), mapPath).map!;
    const asset = map.assets[0];
    const runtime = new AssetRuntime(asset, map.agent, 'qband', await createRealFft(asset.analysis.frameSize));
    expect(runtime.subscriptions()).toContain('qband/cw-pump-2/samples/motor-top-x');
    const t0S = Date.now() / 1000 - 60;
    const out = shortRunBlocks(mapPath, 'qband', t0S).flatMap((b) => runtime.onMessage(b.topic, b.payload as Buffer, Date.now()).out);
    const raise = out.filter((o) => o.kind === 'alarm').map((o) => JSON.parse(o.payload)).find((a) => a.event === 'raise');
    expect(raise, 'a raise').toBeTruthy();
    // Same hand-computed time as the other live tests (test/support/liveRig.ts), to a decision step.
    expect(Math.abs(raise.t_s - t0S - SHORT_RUN_RAISE_S)).toBeLessThan(0.3);
    expect(raise.amplitude?.sensor, 'the 1X amplitude measured from the sensor fed by topic').toBe('motor-top-x');
    expect(raise.amplitude.velocity_rms_mm_s).toBeGreaterThan(0);
    const lastState = out.filter((o) => o.kind === 'state').map((o) => JSON.parse(o.payload)).at(-1);
    expect(lastState.severity.map((s: { sensor: string }) => s.sensor)).toEqual(['motor-top-x']);
  });

  it('replay refuses it, naming the sensor, with exit 1 and QB_E_CHANNEL_MISSING', async () => {
    const { code, err } = await run(['replay', '--map', mapPath, 'demo/north-basin-runup.wav']);
    expect(code).toBe(1);
    expect(err).toContain("sensor 'motor-top-x' has no recording channel in asset cw-pump-2 (fed over MQTT only)");
    expect(err).toContain('[QB_E_CHANNEL_MISSING]');
    expect(err).not.toMatch(/\n\s+at /);
  });

  it('simulate refuses it the same way', async () => {
    const { code, err } = await run(['simulate', '--map', mapPath, '--profile', 'config/demo-profile.yaml', '-o', `${tempDir()}/x.wav`]);
    expect(code).toBe(1);
    expect(err).toContain("sensor 'motor-top-x' has no recording channel");
  });
});
