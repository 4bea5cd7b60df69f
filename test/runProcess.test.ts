import { spawn, type ChildProcess } from 'node:child_process';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { collect, connectClient } from './support/mqttClients.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { eventually, publishAll, startTestBroker, tempDir, uniquePrefix, writeTestMap, type TestBroker } from './support/liveRig.ts';
import { POOL_ASSETS, poolMapText, poolMessages } from './support/poolRig.ts';

// `qband run` as a real process: what an operator or a service manager sees.
const BIN = new URL('../bin/qband.mjs', import.meta.url).pathname;

let broker: TestBroker;
beforeAll(async () => {
  broker = await startTestBroker();
});
afterAll(async () => {
  await broker.close();
});

function start(args: string[], env: Record<string, string> = {}): { child: ChildProcess; stderr: () => string; exit: Promise<number | null> } {
  const child = spawn(process.execPath, [BIN, 'run', ...args], { env: { ...process.env, ...env }, stdio: ['ignore', 'pipe', 'pipe'] });
  let err = '';
  child.stderr!.on('data', (d) => (err += d));
  const exit = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
  return { child, stderr: () => err, exit };
}

describe('qband run (process)', () => {
  it('comes online, logs JSON with the common fields, and on SIGTERM goes offline and exits 0', async () => {
    const prefix = uniquePrefix();
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const version = broker.protocolVersion === 5 ? '5' : '3.1.1';
    const clientId = `qband-proc-${process.pid}`;
    const watcher = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    const inbox = collect(watcher);
    const status = `${prefix}/agent/${clientId}/status`;
    await watcher.subscribeAsync(status, { qos: 1 });
    const p = start(['--map', mapPath, '--mqtt-version', version, '--client-id', clientId, '--state-dir', tempDir()], {
      QBAND_MQTT_USERNAME: 'qband-agent',
      QBAND_MQTT_PASSWORD: 'not-to-be-logged-8731',
    });
    try {
      await eventually('online presence', () => inbox.messages.find((m) => m.topic === status && JSON.parse(m.payload).state === 'online'), 15_000);
      p.child.kill('SIGTERM');
      expect(await p.exit).toBe(0);
      const last = await eventually('offline presence', () =>
        inbox.messages.filter((m) => m.topic === status).map((m) => JSON.parse(m.payload)).find((x) => x.state === 'offline'),
      );
      expect(last.client_id).toBe(clientId);
      const lines = p
        .stderr()
        .split('\n')
        .filter(Boolean)
        .map((l) => JSON.parse(l));
      const startLine = lines.find((l) => l.code === 'QB_I_START');
      expect(startLine).toMatchObject({ stage: 'agent', site: 'north-basin', client_id: clientId });
      expect(lines.some((l) => l.code === 'QB_I_STOP')).toBe(true);
      expect(p.stderr()).not.toContain('not-to-be-logged-8731');
    } finally {
      p.child.kill('SIGKILL');
      await watcher.publishAsync(status, '', { qos: 1, retain: true });
      await watcher.endAsync();
    }
  });

  it('with --workers 2 runs the assets on worker threads from the build: a raise, then exit 0 on SIGTERM', async () => {
    const prefix = uniquePrefix();
    const dir = tempDir();
    const mapPath = join(dir, 'map.yaml');
    writeFileSync(mapPath, poolMapText(prefix, broker.url));
    const version = broker.protocolVersion === 5 ? '5' : '3.1.1';
    const clientId = `qband-procw-${process.pid}`;
    const client = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    const inbox = collect(client);
    await client.subscribeAsync([`${prefix}/+/alarm`, `${prefix}/agent/${clientId}/status`], { qos: 1 });
    const p = start(['--map', mapPath, '--mqtt-version', version, '--client-id', clientId, '--no-state', '--workers', '2']);
    try {
      await eventually('online presence', () => inbox.messages.find((m) => m.topic.endsWith('/status') && JSON.parse(m.payload).state === 'online'), 15_000);
      const { map } = parseAssetMap(readFileSync(mapPath, 'utf8'), mapPath);
      await publishAll(client, poolMessages(map!, prefix, Date.now() / 1000 - 80));
      await eventually('a raise on every asset', () => POOL_ASSETS.every((a) => inbox.messages.some((m) => m.topic === `${prefix}/${a}/alarm` && JSON.parse(m.payload).event === 'raise')), 20_000);
      p.child.kill('SIGTERM');
      expect(await p.exit).toBe(0);
      const lines = p.stderr().split('\n').filter(Boolean).map((l) => JSON.parse(l));
      expect(lines.find((l) => l.code === 'QB_I_START')).toMatchObject({ workers: 2 });
      expect(lines.filter((l) => l.level >= 50)).toEqual([]);
    } finally {
      p.child.kill('SIGKILL');
      await client.publishAsync(`${prefix}/agent/${clientId}/status`, '', { qos: 1, retain: true });
      await client.endAsync();
    }
    const bad = start(['--map', mapPath, '--workers', '65']);
    expect(await bad.exit).toBe(2);
    expect(bad.stderr()).toMatch(/--workers must be auto or a whole number from 0 to 64, got '65'/);
  }, 60_000);

  it('refuses to start on an invalid map, listing every problem (exit 1)', async () => {
    const dir = tempDir();
    const mapPath = join(dir, 'bad.yaml');
    writeFileSync(mapPath, 'site: x\nassets:\n  - id: a\n    speed: { source: tach, range_rpm: [900, 100] }\n');
    const p = start(['--map', mapPath]);
    expect(await p.exit).toBe(1);
    expect(p.stderr()).toMatch(/QB_E_CONFIG_INVALID/);
    expect(p.stderr().match(/\[QB_E_CONFIG_/g)!.length).toBeGreaterThan(2);
  });

  it('refuses to start without a broker (exit 1) and teaches with --help (exit 0)', async () => {
    const mapPath = join(tempDir(), 'map.yaml');
    writeFileSync(mapPath, writeTestMapText());
    const p = start(['--map', mapPath]);
    expect(await p.exit).toBe(1);
    expect(p.stderr()).toMatch(/QB_E_NO_BROKER/);
    const h = spawn(process.execPath, [BIN, 'run', '--help']);
    let out = '';
    h.stdout.on('data', (d) => (out += d));
    expect(await new Promise((r) => h.on('exit', r))).toBe(0);
    expect(out).toMatch(/QBAND_MQTT_PASSWORD_FILE/);
    expect(out).toMatch(/never stops a machine/);
  });

  it('--http serves the page and /metrics on loopback, logs the address, and refuses a bad address or token', async () => {
    const prefix = uniquePrefix();
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const version = broker.protocolVersion === 5 ? '5' : '3.1.1';
    const p = start(['--map', mapPath, '--mqtt-version', version, '--no-state', '--http', ':0'], { QBAND_HTTP_TOKEN: 'process-token-0123456789' });
    try {
      const line = await eventually(
        'the page address in the log',
        () => p.stderr().split('\n').filter(Boolean).map((l) => JSON.parse(l)).find((l) => l.code === 'QB_I_HTTP'),
        15_000,
      );
      expect(line.url).toMatch(/^http:\/\/127\.0\.0\.1:\d+\/$/);
      expect(line.commands).toBe(true);
      const metrics = await (await fetch(new URL('/metrics', line.url))).text();
      expect(metrics).toMatch(/^qband_broker_connected 1$/m);
      expect(metrics).not.toContain('process-token');
      p.child.kill('SIGTERM');
      expect(await p.exit).toBe(0);
    } finally {
      p.child.kill('SIGKILL');
    }
    const bad = start(['--map', mapPath, '--http', 'nowhere']);
    expect(await bad.exit).toBe(2);
    expect(bad.stderr()).toMatch(/--http must be host:port.*QB_E_USAGE/);
    const short = start(['--map', mapPath, '--http', ':0'], { QBAND_HTTP_TOKEN: 'short' });
    expect(await short.exit).toBe(1);
    expect(short.stderr()).toMatch(/QB_E_HTTP_TOKEN/);
  });
});

/** The demo map as it is: it names no broker. */
function writeTestMapText(): string {
  return readFileSync(new URL('../config/demo-map.yaml', import.meta.url), 'utf8');
}
