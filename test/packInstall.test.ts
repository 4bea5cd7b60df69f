import { spawn, spawnSync, type SpawnSyncReturns } from 'node:child_process';
import { existsSync, readdirSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { collect, connectClient } from './support/mqttClients.ts';
import { eventually, startTestBroker, tempDir, uniquePrefix, writeTestMap, type TestBroker } from './support/liveRig.ts';

// The package as a site gets it: `npm pack`, then `npm install -g <tarball>` into a temporary
// prefix outside the checkout (so nothing resolves to the checkout's node_modules), then the
// installed `qband` command run as an operator would. The install fetches the production
// dependencies from the registry (or npm's cache); no dev dependency may come with it.
const ROOT = new URL('..', import.meta.url).pathname;
const DEV_ONLY = ['typescript', 'tsx', 'vitest', 'vite', 'fast-check', 'odex', 'esbuild'];

let prefix = '';
let installed = '';
let qband = '';
let broker: TestBroker;

function run(cmd: string, args: string[], cwd: string): SpawnSyncReturns<string> {
  const r = spawnSync(cmd, args, { cwd, encoding: 'utf8', env: { ...process.env, npm_config_audit: 'false', npm_config_fund: 'false' } });
  if (r.status !== 0) throw new Error(`${cmd} ${args.join(' ')} exited ${r.status}:\n${r.stdout}\n${r.stderr}`);
  return r;
}

beforeAll(async () => {
  const packDir = tempDir();
  run('npm', ['pack', '--pack-destination', packDir], ROOT);
  const tarball = readdirSync(packDir).find((f) => f.endsWith('.tgz'));
  if (!tarball) throw new Error('npm pack wrote no tarball');
  prefix = tempDir();
  run('npm', ['install', '-g', '--prefix', prefix, '--prefer-offline', join(packDir, tarball)], packDir);
  installed = join(prefix, 'lib/node_modules/qband');
  qband = join(prefix, 'bin/qband');
  broker = await startTestBroker();
}, 300_000);

afterAll(async () => {
  await broker?.close();
  if (prefix) rmSync(prefix, { recursive: true, force: true });
});

describe('npm pack, npm install -g, qband', () => {
  it('installs the compiled program and production dependencies only', () => {
    expect(existsSync(qband), 'the qband command in the prefix').toBe(true);
    expect(existsSync(join(installed, 'dist/cli/main.js'))).toBe(true);
    expect(existsSync(join(installed, 'node_modules/@echogarden/pffft-wasm')), 'the WebAssembly FFT package').toBe(true);
    expect(existsSync(join(installed, 'src')), 'no TypeScript sources shipped').toBe(false);
    expect(existsSync(join(installed, 'schema/asset-map.schema.json')), 'the asset map schema ships').toBe(true);
    const modules = readdirSync(join(installed, 'node_modules'));
    expect(modules.filter((m) => DEV_ONLY.includes(m))).toEqual([]);
    expect(modules).toEqual(expect.arrayContaining(['mqtt', 'yaml', 'pino', '@echogarden', 'fft.js']));
  });

  it('qband check validates the shipped example map', () => {
    const r = spawnSync(qband, ['check', join(installed, 'config/example-map.yaml')], { cwd: tempDir(), encoding: 'utf8' });
    expect(r.stderr).toBe('');
    expect(r.status).toBe(0);
    expect(r.stdout).toMatch(/valid asset map for site north-basin/);
  });

  it('qband replay runs the shipped demo recording through the WebAssembly FFT to a summary with the raised alarm', () => {
    const r = spawnSync(
      qband,
      ['replay', '--fft', 'pffft', '--map', join(installed, 'config/demo-map.yaml'), '--speed', join(installed, 'demo/north-basin-runup-speed.csv'), join(installed, 'demo/north-basin-runup.wav')],
      { cwd: tempDir(), encoding: 'utf8', maxBuffer: 64 << 20 },
    );
    expect(r.status, r.stderr).toBe(0);
    const records = r.stdout.trim().split('\n').map((l) => JSON.parse(l) as { kind: string; event?: string });
    expect(records.at(-1)!.kind).toBe('summary');
    expect(records.some((x) => x.kind === 'alarm' && x.event === 'raise')).toBe(true);
  });

  it('qband run comes online on a loopback broker, publishes state, and stops on SIGTERM', async () => {
    const topicPrefix = uniquePrefix();
    const mapPath = writeTestMap(tempDir(), topicPrefix, broker.url);
    const clientId = `qband-pack-${process.pid}`;
    const watcher = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    const inbox = collect(watcher);
    await watcher.subscribeAsync(`${topicPrefix}/#`, { qos: 1 });
    const child = spawn(qband, ['run', '--map', mapPath, '--client-id', clientId, '--mqtt-version', broker.protocolVersion === 5 ? '5' : '3.1.1', '--state-dir', tempDir()], {
      cwd: tempDir(),
      stdio: ['ignore', 'ignore', 'pipe'],
    });
    let stderr = '';
    child.stderr!.on('data', (d) => (stderr += d));
    const exit = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
    const status = `${topicPrefix}/agent/${clientId}/status`;
    try {
      await eventually('online presence', () => inbox.messages.find((m) => m.topic === status && JSON.parse(m.payload).state === 'online'), 20_000);
      await eventually('a state message', () => inbox.messages.find((m) => m.topic.endsWith('/state')), 20_000);
      child.kill('SIGTERM');
      expect(await exit, stderr).toBe(0);
    } finally {
      child.kill('SIGKILL');
      await watcher.publishAsync(status, '', { qos: 1, retain: true });
      await watcher.endAsync();
    }
  });
});
