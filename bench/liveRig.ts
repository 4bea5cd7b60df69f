/**
 * The live bench's rig: the broker it runs against, the publisher process it drives, and the
 * small measuring helpers its runs share (bench/liveBench.ts is the entry point).
 */
import { fork, type ChildProcess } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { PerformanceObserver } from 'node:perf_hooks';
import { fileURLToPath } from 'node:url';
import mqtt, { type MqttClient } from 'mqtt';
import type { FromPublisher, ToPublisher } from './livePublisher.ts';

const MOSQUITTO_URL = 'mqtt://127.0.0.1:1883';

export const debug = (what: string): void => void (process.env.QBENCH_DEBUG && console.error(`[${new Date().toISOString()}] ${what}`));
export const wallMs = (): number => performance.timeOrigin + performance.now();
export const cpuS = (): number => {
  const u = process.cpuUsage();
  return (u.user + u.system) / 1e6;
};
/**
 * What the kernel and the garbage collector took of this process from here on, for a drain:
 * system CPU (every thread; on loopback TCP the receive path, the acknowledgements' sends and
 * page faults), minor and major page faults, and the main thread's GC pauses (V8's 'gc'
 * performance entries; concurrent marking on helper threads is in the CPU, not here).
 */
export function startOsMeter(): () => { systemS: number; faults: number; gcPauseS: number } {
  const u0 = process.cpuUsage();
  const r0 = process.resourceUsage();
  let gcMs = 0;
  const observer = new PerformanceObserver((list) => {
    for (const e of list.getEntries()) gcMs += e.duration;
  });
  observer.observe({ entryTypes: ['gc'] });
  return () => {
    observer.disconnect();
    const u = process.cpuUsage(u0);
    const r = process.resourceUsage();
    return { systemS: u.system / 1e6, faults: r.minorPageFault + r.majorPageFault - r0.minorPageFault - r0.majorPageFault, gcPauseS: gcMs / 1000 };
  };
}

export const median = (a: number[]): number => {
  const s = [...a].sort((x, y) => x - y);
  return s.length === 0 ? Number.NaN : s.length % 2 ? s[(s.length - 1) / 2] : (s[s.length / 2 - 1] + s[s.length / 2]) / 2;
};
export const sleep = (ms: number): Promise<void> => new Promise((r) => setTimeout(r, ms));

/** Waits for `p` at most `ms`; says so when it gives up (the bench must end whatever a broker does). */
export async function bounded<T>(p: Promise<T>, what: string, ms = 5000): Promise<T | undefined> {
  let timer: NodeJS.Timeout | undefined;
  const late = new Promise<undefined>((resolve) => {
    timer = setTimeout(() => {
      console.error(`  (${what}: no answer after ${ms} ms, going on)`);
      resolve(undefined);
    }, ms);
  });
  try {
    return await Promise.race([p, late]);
  } finally {
    clearTimeout(timer);
  }
}

/** Busy and total CPU time of the whole machine (all cores), from /proc/stat; null elsewhere. */
export function machineTicks(): { busy: number; total: number } | null {
  try {
    const f = readFileSync('/proc/stat', 'utf8').split('\n')[0].trim().split(/\s+/).slice(1).map(Number);
    const idle = f[3] + (f[4] ?? 0);
    const total = f.reduce((a, v) => a + v, 0);
    return { busy: total - idle, total };
  } catch {
    return null;
  }
}

// ---------------------------------------------------------------------------------- broker

export interface Broker {
  url: string;
  protocolVersion: 4 | 5;
  name: string;
  close(): Promise<void>;
}

export function connectOnce(url: string, protocolVersion: 4 | 5, clientId: string, timeoutMs = 3000): Promise<MqttClient> {
  return new Promise((resolve, reject) => {
    const c = mqtt.connect(url, { protocolVersion, clientId, clean: true, reconnectPeriod: 0, connectTimeout: timeoutMs });
    c.once('connect', () => resolve(c));
    c.once('error', (e) => {
      c.end(true);
      reject(e);
    });
    c.once('close', () => reject(new Error(`no connection to ${url}`)));
  });
}

async function mosquittoVersion(c: MqttClient): Promise<string | null> {
  let version: string | null = null;
  const onMessage = (topic: string, payload: Buffer): void => {
    if (topic === '$SYS/broker/version') version = payload.toString();
  };
  c.on('message', onMessage);
  await c.subscribeAsync('$SYS/broker/version').catch(() => undefined);
  for (let i = 0; i < 10 && version === null; i++) await sleep(30);
  c.off('message', onMessage);
  await c.unsubscribeAsync('$SYS/broker/version').catch(() => undefined);
  return version;
}

/** --broker <url> (MQTT 5), --broker aedes, or by default Mosquitto on 127.0.0.1:1883 else aedes. */
export async function pickBroker(given: string): Promise<Broker> {
  if (given && given !== 'aedes') return { url: given, protocolVersion: 5, name: `${given} (given), MQTT 5`, close: async () => undefined };
  try {
    if (given === 'aedes') throw new Error('aedes asked for');
    const c = await connectOnce(MOSQUITTO_URL, 5, `qbench-probe-${process.pid}`, 1500);
    const version = await mosquittoVersion(c);
    await c.endAsync();
    return { url: MOSQUITTO_URL, protocolVersion: 5, name: `${version ?? 'broker'} at 127.0.0.1:1883, own process, MQTT 5`, close: async () => undefined };
  } catch {
    const child = fork(fileURLToPath(new URL('./benchBroker.ts', import.meta.url)), [], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
    const port = await new Promise<number>((resolve, reject) => {
      child.once('message', (m: { port: number }) => resolve(m.port));
      child.once('exit', (code) => reject(new Error(`aedes broker process exited (${code})`)));
    });
    return {
      url: `mqtt://127.0.0.1:${port}`,
      protocolVersion: 4,
      name: `aedes in a child process on port ${port}, MQTT 3.1.1 (${given === 'aedes' ? 'asked for' : 'no Mosquitto on 127.0.0.1:1883'})`,
      close: () => stopChild(child),
    };
  }
}

export function stopChild(child: ChildProcess): Promise<void> {
  if (child.exitCode !== null || child.signalCode !== null) return Promise.resolve();
  return new Promise((resolve) => {
    const timer = setTimeout(() => child.kill('SIGKILL'), 3000);
    child.once('exit', () => {
      clearTimeout(timer);
      resolve();
    });
    if (child.connected) child.disconnect();
    else child.kill('SIGTERM');
  });
}

// ------------------------------------------------------------------------------- publisher

export class Publisher {
  readonly child: ChildProcess;
  private handler: (m: FromPublisher) => void = () => undefined;

  private constructor(child: ChildProcess) {
    this.child = child;
    child.on('message', (m: FromPublisher) => {
      if (m.type === 'error') console.error(`publisher: ${m.message}`);
      this.handler(m);
    });
  }

  static async start(broker: Broker): Promise<Publisher> {
    const child = fork(fileURLToPath(new URL('./livePublisher.ts', import.meta.url)), [], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'] });
    const p = new Publisher(child);
    await new Promise<void>((resolve, reject) => {
      p.handler = (m) => (m.type === 'connected' ? resolve() : m.type === 'error' ? reject(new Error(m.message)) : undefined);
      child.once('exit', (code) => reject(new Error(`publisher exited (${code})`)));
      p.send({ type: 'connect', url: broker.url, protocolVersion: broker.protocolVersion });
    });
    return p;
  }

  send(m: ToPublisher): void {
    if (this.child.connected) this.child.send(m);
  }

  onMessage(handler: (m: FromPublisher) => void): void {
    this.handler = handler;
  }
}


/** Empties every retained message left under the bench's prefix (a safety net: runs clear their own). */
export async function clearRetained(sub: MqttClient, prefixRoot: string): Promise<void> {
  const left = new Set<string>();
  const onMessage = (topic: string, payload: Buffer, packet: { retain?: boolean }): void => {
    if (packet.retain && payload.length > 0) left.add(topic);
  };
  sub.on('message', onMessage);
  await sub.subscribeAsync(`${prefixRoot}/#`, { qos: 1 });
  await sleep(300);
  await sub.unsubscribeAsync(`${prefixRoot}/#`);
  sub.off('message', onMessage);
  await Promise.all([...left].map((t) => sub.publishAsync(t, '', { qos: 1, retain: true })));
}
