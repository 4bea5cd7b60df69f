import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { createConnection } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ADVISORY_NOTICE } from '../src/advisory/records.ts';
import { decodeSampleBlock } from '../src/acquisition/samplePayload.ts';
import { DEMO_MAP, DEMO_RECORDING, demoCommand } from '../src/cli/demo.ts';
import type { CliIo } from '../src/cli/io.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { publishMachine } from '../src/demo/machinePublisher.ts';
import type { DemoResult } from '../src/demo/runDemo.ts';

const REPO = fileURLToPath(new URL('..', import.meta.url));

function fakeIo(): CliIo & { out: () => string; err: () => string } {
  let out = '';
  let err = '';
  return {
    stdout: { write: (s: string) => (out += s) },
    stderr: { write: (s: string) => (err += s) },
    cwd: REPO,
    out: () => out,
    err: () => err,
  };
}

function demoAsset() {
  const { map, problems } = parseAssetMap(readFileSync(DEMO_MAP, 'utf8'), DEMO_MAP);
  expect(problems).toEqual([]);
  return map!.assets[0];
}

/** Resolves with the error code of a TCP connection attempt, or 'connected'. */
function tryConnect(port: number): Promise<string> {
  return new Promise((resolve) => {
    const socket = createConnection({ host: '127.0.0.1', port });
    socket.once('connect', () => {
      socket.destroy();
      resolve('connected');
    });
    socket.once('error', (e: NodeJS.ErrnoException) => resolve(e.code ?? e.message));
  });
}

// Hand-computed story of the demo run (config/demo-profile.yaml and config/demo-map.yaml):
// velocity half-power band of the motor reed, fn (sqrt(1 + zeta^2) -/+ zeta) with zeta = 1/(2Q),
// the standard SDOF result (common practice; docs/engine.md); speed profile 600 rpm for 10 s,
// ramp to 852 rpm over 10..30 s, hold to 90 s, ramp to 950 rpm over 90..100 s.
const ZETA_REED = 1 / (2 * 8);
const REED_LO_HZ = 14.2 * (Math.sqrt(1 + ZETA_REED ** 2) - ZETA_REED); // 13.340 Hz
const REED_HI_HZ = 14.2 * (Math.sqrt(1 + ZETA_REED ** 2) + ZETA_REED); // 15.115 Hz
const DEADBAND_HZ = 0.01 * 14.2; // deadband_pct 1 of fn
const ENTER_S = 10 + ((60 * REED_LO_HZ - 600) / (852 - 600)) * 20; // 25.91 s
const EXIT_S = 90 + ((60 * (REED_HI_HZ + DEADBAND_HZ) - 852) / (950 - 852)) * 10; // 96.47 s
const RAISE_S = ENTER_S + 30; // on_delay_s 30 -> 55.91 s
const CLEAR_S = EXIT_S + 10; // off_delay_s 10 -> 106.47 s
// An event lands on the first decision step (0.1 s) at or after the exact time. On top of that
// the tach speed is uncertain: edges timed to about a sample (1/2560 s) over its 4-revolution
// averaging span (0.26 s at 915 rpm) is ~0.15 % of speed, ~1.4 rpm, which on the 9.8 rpm/s ramp
// out of the band moves the crossing by ~0.14 s (~0.08 s on the 12.6 rpm/s ramp in); 0.3 s
// covers that with margin.
const STEP_S = 0.1;
const SPEED_SLACK_S = 0.3;
function expectNear(what: string, actualS: number, exactS: number): void {
  const lateS = actualS - exactS;
  expect(
    lateS >= -SPEED_SLACK_S && lateS <= STEP_S + SPEED_SLACK_S,
    `${what}: at +${actualS.toFixed(3)} s of the run, hand-computed +${exactS.toFixed(3)} s; expected within [-${SPEED_SLACK_S}, +${STEP_S + SPEED_SLACK_S}] s of it`,
  ).toBe(true);
}

describe('qband demo, in-process at 30x (embedded broker, live agent, simulated gateway)', () => {
  const io = fakeIo();
  const dir = mkdtempSync(join(tmpdir(), 'qband-demo-test-'));
  const logPath = join(dir, 'agent.log');
  let code: number;
  let result: DemoResult;

  beforeAll(async () => {
    code = await demoCommand({ logPath, clientId: 'qband-demo-test', onResult: (r) => (result = r) })(['--speed', '30'], io);
  }, 60_000);
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  it('finishes by itself with exit code 0', () => {
    expect(code, io.err()).toBe(0);
    expect(result.published?.aborted).toBe(false);
  });

  it('publishes the whole run: 724 blocks of 0.25 s per topic, none dropped by the agent', () => {
    // 181 s (the profile's segments: 10 + 20 + 60 + 10 + 6 + 45 + 30) / 0.25 s = 724 per topic.
    expect(result.published?.perTopic).toEqual({ 'qband/cw-pump-2/samples/motor-top-x': 724, 'qband/cw-pump-2/samples/tach': 724 });
    const drops = Object.entries(result.lastState?.counters ?? {}).filter(([k]) => k.startsWith('drop_'));
    expect(drops, `agent counters: ${JSON.stringify(result.lastState?.counters)}`).toEqual([]);
  });

  it('raises motor-reed / 1x once, about 30 s after 1X enters the band, and clears it once', () => {
    const reed = result.alarms.filter((a) => a.component === 'motor-reed' && a.order === '1x');
    expect(reed.map((a) => a.event)).toEqual(['raise', 'clear']);
    const startS = result.run!.startS;
    expectNear('raise of motor-reed / 1x', reed[0].t_s - startS, RAISE_S);
    expectNear('clear of motor-reed / 1x', reed[1].t_s - startS, CLEAR_S);
  });

  it('raises nothing for the quick passes of vane pass through the discharge-pipe band, yet counts them as exposure', () => {
    expect(result.alarms.filter((a) => a.component === 'discharge-pipe')).toEqual([]);
    const pipe = result.lastState?.exposure.find((e) => e.component === 'discharge-pipe');
    // Two passes of ~2.4 s and ~2.8 s (config/demo-map.yaml comments): a few seconds in all.
    expect(pipe && pipe.seconds_in_band > 2 && pipe.seconds_in_band < 15, `discharge-pipe exposure ${JSON.stringify(pipe)}, expected 2..15 s`).toBe(true);
  });

  it('shows the alarm with its procedure and the advisory caution, and the bearing order, without terminal codes', () => {
    const text = io.out().replace(/\s+/g, ' ');
    expect(text).toContain('RAISED motor-reed / 1x');
    expect(text).toContain('CLEARED motor-reed / 1x');
    expect(text).toContain(demoAsset().procedure);
    expect(text).toContain(ADVISORY_NOTICE);
    expect(text).toContain('motor-bpfo');
    expect(text).toContain('vane-pass entered the discharge-pipe band');
    expect(text).toContain('Summary');
    expect(io.out()).not.toMatch(/\x1b\[/);
  });

  it("saw the agent's presence go online, then offline", () => {
    expect(result.presence).toEqual(['online', 'offline']);
  });

  it('closed the embedded broker: its port no longer accepts connections', async () => {
    expect(result.embedded).toBe(true);
    const port = Number(new URL(result.brokerUrl).port);
    expect(port).toBeGreaterThan(0);
    expect(await tryConnect(port)).toBe('ECONNREFUSED');
  });

  it('served the operator page during the run, printed its address, and closed it at the end', async () => {
    expect(result.pageUrl).toMatch(/^http:\/\/127\.0\.0\.1:\d+\/$/);
    expect(io.out()).toContain(`page     ${result.pageUrl}`);
    expect(await tryConnect(Number(new URL(result.pageUrl!).port))).toBe('ECONNREFUSED');
  });

  it('left an agent log of JSON lines with both alarm events and no warning or error', () => {
    const lines = readFileSync(logPath, 'utf8').trim().split('\n').map((l) => JSON.parse(l) as { level: number; code?: string; msg: string });
    expect(lines.filter((l) => l.code === 'QB_I_ALARM')).toHaveLength(2);
    const bad = lines.filter((l) => l.level >= 40);
    expect(bad, JSON.stringify(bad)).toEqual([]);
  });
});

describe('qband demo, stopped early (Ctrl-C)', () => {
  it('stops cleanly: agent offline, broker closed, exit code 0, summary says so', async () => {
    const io = fakeIo();
    const dir = mkdtempSync(join(tmpdir(), 'qband-demo-test-'));
    const abort = new AbortController();
    let result: DemoResult | undefined;
    const timer = setTimeout(() => abort.abort(), 1500);
    try {
      const code = await demoCommand({ logPath: join(dir, 'agent.log'), signal: abort.signal, clientId: 'qband-demo-stop', onResult: (r) => (result = r) })(['--speed', '5'], io);
      expect(code, io.err()).toBe(0);
    } finally {
      clearTimeout(timer);
      rmSync(dir, { recursive: true, force: true });
    }
    expect(result!.published?.aborted).toBe(true);
    expect(result!.presence).toEqual(['online', 'offline']);
    expect(await tryConnect(Number(new URL(result!.brokerUrl).port))).toBe('ECONNREFUSED');
    expect(io.out()).toContain('Summary (stopped early)');
  }, 30_000);
});

describe('machine publisher timestamps', () => {
  it('never stamps a block later than the wall clock when it goes out, and ends the run at about now', async () => {
    const asset = demoAsset();
    const sent: Array<{ topic: string; nowS: number; tS: number; endS: number }> = [];
    const client = {
      publishAsync: async (topic: string, payload: Buffer) => {
        const decoded = decodeSampleBlock(payload, { maxSamples: 1 << 20 });
        if (!decoded.ok) throw new Error(decoded.detail);
        const b = decoded.block;
        sent.push({ topic, nowS: Date.now() / 1000, tS: b.tS, endS: b.tS + b.samples.length / b.sampleRateHz });
      },
    } as unknown as MqttClient;
    // 1000 data seconds per wall second: the 181 s run goes out in about 0.2 s.
    const counts = await publishMachine({ client, asset, topicPrefix: 'qband', source: { kind: 'recording', path: DEMO_RECORDING }, speed: 1000 });
    expect(counts.blocks).toBe(2 * 724);
    // Stamps are rounded to the millisecond downwards; allow 1 ms for the clock read afterwards.
    const ahead = sent.filter((s) => s.endS > s.nowS + 0.001);
    expect(ahead.slice(0, 3), `blocks whose last sample lies in the future when published (of ${sent.length})`).toEqual([]);
    const last = sent[sent.length - 1];
    // The run ends about now: within a block (0.25 s) plus scheduling slack (0.5 s, common practice for timers).
    expect(Math.abs(last.endS - last.nowS), `last block ends at ${last.endS}, published at ${last.nowS}`).toBeLessThan(0.75);
    // seq counts up from 0 per topic, blocks follow on without a gap (t + count / fs).
    const tach = sent.filter((s) => s.topic.endsWith('/tach'));
    for (let i = 1; i < tach.length; i++) expect(Math.abs(tach[i].tS - tach[i - 1].endS)).toBeLessThan(0.5 / 2560);
  });
});

describe('qband demo command line', () => {
  it('--help teaches what it starts, what to expect and each option', async () => {
    const io = fakeIo();
    expect(await demoCommand()(['--help'], io)).toBe(0);
    const help = io.out();
    for (const word of ['Usage: qband demo', '--speed', '--realtime', '--broker', '--mqtt-version', '--json', 'Ctrl-C', 'fictional', 'never stops a machine']) {
      expect(help).toContain(word);
    }
  });

  it.each([
    [['--speed', '0'], '--speed must be a number'],
    [['--speed', 'fast'], '--speed must be a number'],
    [['--realtime', '--speed', '2'], 'exclude each other'],
    [['--mqtt-version', '4'], '--mqtt-version must be 5 or 3.1.1'],
    [['--mqtt-version', '3.1.1'], 'goes with --broker'],
    [['--bogus'], 'bogus'],
    [['extra'], 'extra'],
  ])('usage error %j exits 2 with QB_E_USAGE', async (args, message) => {
    const io = fakeIo();
    expect(await demoCommand()(args, io)).toBe(2);
    expect(io.err()).toContain(message);
    expect(io.err()).toContain('[QB_E_USAGE]');
    expect(io.out()).toBe('');
  });
});
