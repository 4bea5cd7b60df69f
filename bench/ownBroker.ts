/**
 * A Mosquitto of the live bench's own, for the saturated level (liveBacklog.ts): the machine's
 * `mosquitto` binary started on a free loopback port with a temporary config whose per-client
 * queue holds the whole backlog (a stock Mosquitto keeps at most 1000 queued messages for an
 * absent client, 0.15 s of blocks at 700 channels). Nothing is written to disk but the config;
 * the broker ends with the bench. Without the binary the level is not run, and says so.
 */
import { spawn, type ChildProcess } from 'node:child_process';
import { accessSync, constants, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer, Socket } from 'node:net';
import { tmpdir } from 'node:os';
import { delimiter, join } from 'node:path';
import { sleep, stopChild, type Broker } from './liveRig.ts';

/** QBENCH_MOSQUITTO names the binary; else `mosquitto` on the PATH or in the usual sbin folders. */
export function findMosquitto(): string | null {
  const given = process.env.QBENCH_MOSQUITTO;
  const dirs = [...(process.env.PATH ?? '').split(delimiter), '/usr/sbin', '/usr/local/sbin', '/opt/homebrew/sbin'].filter(Boolean);
  for (const path of given ? [given] : dirs.map((d) => join(d, 'mosquitto'))) {
    try {
      accessSync(path, constants.X_OK);
      return path;
    } catch {
      // not here
    }
  }
  return null;
}

function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => resolve(port));
    });
  });
}

function answers(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const s = new Socket();
    s.once('connect', () => (s.destroy(), resolve(true)));
    s.once('error', () => (s.destroy(), resolve(false)));
    s.connect(port, '127.0.0.1');
  });
}

/** The config: loopback only, anonymous (nothing else can reach it), no persistence, queue bounds as given. */
export function ownBrokerConfig(port: number, queue: { messages: number; bytes: number }): string {
  return [
    '# The live bench\'s own broker (bench/ownBroker.ts), generated; removed when the bench ends.',
    `listener ${port} 127.0.0.1`,
    'allow_anonymous true',
    'persistence false',
    // The whole backlog waits in the absent agent's session: queue bounds above it.
    `max_queued_messages ${queue.messages}`,
    `max_queued_bytes ${queue.bytes}`,
    // As deploy/mosquitto/mosquitto.conf; max_inflight_messages stays Mosquitto's default (20).
    'max_packet_size 4194304',
    'log_dest none',
    '',
  ].join('\n');
}

/**
 * Starts the bench's own Mosquitto, or says why it could not (no binary, or
 * it did not answer within 5 s).
 */
export async function startOwnMosquitto(queue: { messages: number; bytes: number }): Promise<{ broker: Broker } | { notRun: string }> {
  const bin = findMosquitto();
  if (!bin) {
    const given = process.env.QBENCH_MOSQUITTO;
    return { notRun: given ? `QBENCH_MOSQUITTO=${given} is not an executable file` : 'no mosquitto binary on this machine (PATH, /usr/sbin, /usr/local/sbin; QBENCH_MOSQUITTO names one)' };
  }
  const dir = mkdtempSync(join(tmpdir(), 'qbench-mosquitto-'));
  const port = await freePort();
  const conf = join(dir, 'mosquitto.conf');
  writeFileSync(conf, ownBrokerConfig(port, queue));
  const child: ChildProcess = spawn(bin, ['-c', conf], { stdio: ['ignore', 'ignore', 'pipe'] });
  let stderr = '';
  child.stderr?.on('data', (d: Buffer) => void (stderr = (stderr + d.toString()).slice(-2000)));
  let exited = false;
  child.once('exit', () => void (exited = true));
  child.once('error', () => void (exited = true));
  const cleanUp = async (): Promise<void> => {
    child.kill('SIGTERM');
    await stopChild(child);
    rmSync(dir, { recursive: true, force: true });
  };
  for (let i = 0; i < 100 && !exited; i++) {
    if (await answers(port)) {
      const version = await new Promise<string>((resolve) => {
        const v = spawn(bin, ['-h'], { stdio: ['ignore', 'pipe', 'ignore'] });
        let out = '';
        v.stdout.on('data', (d: Buffer) => void (out += d.toString()));
        v.once('close', () => resolve(/mosquitto version (\S+)/.exec(out)?.[1] ?? '?'));
        v.once('error', () => resolve('?'));
      });
      return {
        broker: {
          url: `mqtt://127.0.0.1:${port}`,
          protocolVersion: 5,
          name: `the bench's own mosquitto ${version} (${bin}) on 127.0.0.1:${port}, MQTT 5, queue up to ${queue.messages} messages / ${(queue.bytes / 1e6).toFixed(0)} MB per client, no persistence`,
          close: cleanUp,
        },
      };
    }
    await sleep(50);
  }
  await cleanUp();
  return { notRun: `${bin} did not start on port ${port}${stderr ? `: ${stderr.trim()}` : ''}` };
}
