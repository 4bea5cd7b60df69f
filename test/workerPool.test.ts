/**
 * The runtimes' host with 0 (the agent's thread), 1, 2 and 3 worker threads: the same
 * four-asset run gives byte-identical outbound messages per asset topic (alarm and lifecycle
 * events, transients, identifications, state, refusals), the same drops and the same final
 * state. Payloads arrive as views into one larger buffer, as mqtt.js hands them over.
 */
import { afterEach, describe, expect, it } from 'vitest';
import type { LogSink } from '../src/agent/transientStore.ts';
import type { HostResult, RuntimeHost } from '../src/agent/workers/runtimeHost.ts';
import { autoWorkerCount, createRuntimeHost, parseWorkerSetting } from '../src/agent/workers/workerCount.ts';
import { POOL_ASSETS, poolMap, poolMessages, poolSpecs } from './support/poolRig.ts';

const PREFIX = 'pooltest';
const T0_S = Math.floor(Date.now() / 1000) - 600;
const { map, text } = poolMap(PREFIX);
const messages = poolMessages(map, PREFIX, T0_S);
// Two of pump-a's blocks out of order: the sequencer holds the early one, so a runtime that kept
// a view into a batch buffer the pool reuses would decide on overwritten bytes.
{
  const at = (seq: number) => messages.findIndex((m) => m.topic === `${PREFIX}/pump-a/samples/motor-top-x` && m.payload.readUInt32LE(4) === seq);
  const [a, b] = [at(30), at(31)];
  if (a < 0 || b < 0) throw new Error('pump-a has no blocks 30 and 31');
  [messages[a], messages[b]] = [messages[b], messages[a]];
}
/** Every payload a view into one buffer (with bytes before and after), like mqtt.js's. */
const backing = Buffer.concat([Buffer.from('head'), ...messages.map((m) => m.payload), Buffer.from('tail')]);
const views: Buffer[] = [];
for (let at = 4, i = 0; i < messages.length; i++) {
  views.push(backing.subarray(at, at + messages[i].payload.length));
  at += messages[i].payload.length;
}
const silent: LogSink = { info: () => undefined, warn: () => undefined, error: () => undefined };
const hosts: RuntimeHost[] = [];
afterEach(async () => {
  for (const h of hosts.splice(0)) await h.stop();
});

interface Run {
  byTopic: Map<string, string[]>;
  drops: Map<string, string[]>;
  final: Map<string, string>;
  /** Times the host said it was saturated (flow control held the feed). */
  saturations: number;
}

async function runThrough(workers: number): Promise<Run> {
  const byTopic = new Map<string, string[]>();
  const drops = new Map<string, string[]>();
  const add = <T>(m: Map<string, T[]>, k: string, v: T) => m.set(k, [...(m.get(k) ?? []), v]);
  const seen: HostResult[] = [];
  const host = createRuntimeHost(workers, { result: (r) => seen.push(r), load: () => undefined, log: () => undefined }, silent);
  hosts.push(host);
  expect(host.workerCount).toBe(workers);
  await host.add(poolSpecs(map, text, PREFIX));
  let saturations = 0;
  for (let i = 0; i < messages.length; i++) {
    const m = messages[i];
    host.message(m.asset, m.topic, views[i], Math.round(m.endS * 1000) + 40);
    if (i === 100) host.message('pump-c', `${PREFIX}/pump-c/samples/motor-top-x`, Buffer.from('not a block'), Math.round(m.endS * 1000));
    if (i === 300) {
      // An operator command from another view, in the middle of the run.
      const r = await host.command('pump-b', Buffer.from(JSON.stringify({ action: 'shelve', component: 'motor-reed', order: '1x', duration_s: 2, by: 'test' })), Math.round(m.endS * 1000));
      expect(r.out.some((o) => o.kind === 'lifecycle')).toBe(true);
    }
    if (host.saturated) {
      saturations++;
      await new Promise<void>((resume) => host.whenReady(resume));
    }
  }
  host.tick(Math.round((messages.at(-1)?.endS ?? 0) * 1000) + 500, true);
  const final = await host.stop();
  hosts.splice(hosts.indexOf(host), 1);
  for (const r of seen) {
    for (const o of r.out) add(byTopic, o.topic, o.payload);
    for (const d of r.drops) add(drops, r.asset, JSON.stringify(d));
    expect(r.failed).toBeUndefined();
  }
  return { byTopic, drops, final: new Map(final.map((s) => [s.asset, JSON.stringify(s.snapshot)])), saturations };
}

describe('the runtimes host with 0, 1, 2 and 3 workers', () => {
  it('gives byte-identical messages per asset topic, drops and final state', async () => {
    const base = await runThrough(0);
    // The run must raise and clear on every asset, or the comparison proves little.
    for (const id of POOL_ASSETS) {
      const events = (base.byTopic.get(`${PREFIX}/${id}/alarm`) ?? []).map((p) => (JSON.parse(p) as { event: string }).event);
      expect(events, `alarm events of ${id}`).toEqual(expect.arrayContaining(['raise', 'clear']));
      expect(base.byTopic.get(`${PREFIX}/${id}/state`)?.length ?? 0, `state messages of ${id}`).toBeGreaterThan(5);
    }
    expect(base.byTopic.get(`${PREFIX}/pump-b/alarm`)?.some((p) => p.includes('"shelve"'))).toBe(true);
    expect(base.drops.get('pump-c')?.length).toBe(1);
    // The swapped blocks were put back in order, not dropped.
    expect(base.drops.get('pump-a')).toBeUndefined();
    const raises = POOL_ASSETS.map((id) => (base.byTopic.get(`${PREFIX}/${id}/alarm`) ?? []).map((p) => JSON.parse(p) as { event: string; t_s: number }).find((e) => e.event === 'raise')?.t_s);
    expect(new Set(raises).size, 'each asset raises at its own time').toBe(POOL_ASSETS.length);
    for (const workers of [1, 2, 3]) {
      const r = await runThrough(workers);
      // The feed outruns the workers, so flow control (held feed, batches posted ahead) ran.
      if (workers < 3) expect(r.saturations, `saturations with ${workers} workers`).toBeGreaterThan(0);
      expect([...r.byTopic.keys()].sort(), `topics with ${workers} workers`).toEqual([...base.byTopic.keys()].sort());
      for (const [topic, payloads] of base.byTopic) {
        // Compared as bytes, in order, per topic (one asset's messages keep their order).
        expect(r.byTopic.get(topic), `${topic} with ${workers} workers`).toEqual(payloads);
      }
      expect(r.drops).toEqual(base.drops);
      expect(r.final).toEqual(base.final);
    }
  }, 120_000);
});

describe('the number of workers', () => {
  it('auto: one per core, at most one per asset, none for one asset or on one core', () => {
    expect(autoWorkerCount(4, 2)).toBe(2);
    expect(autoWorkerCount(2, 8)).toBe(2);
    expect(autoWorkerCount(1, 8)).toBe(0);
    expect(autoWorkerCount(12, 8)).toBe(8);
    expect(autoWorkerCount(5, 1)).toBe(0);
    expect(autoWorkerCount(0, 4)).toBe(0);
  });
  it('--workers takes auto or 0 to 64', () => {
    expect(parseWorkerSetting('auto')).toEqual({ setting: 'auto' });
    expect(parseWorkerSetting('0')).toEqual({ setting: 0 });
    expect(parseWorkerSetting('3')).toEqual({ setting: 3 });
    for (const bad of ['-1', '65', '1.5', 'two', '']) expect(parseWorkerSetting(bad)).toHaveProperty('fault');
  });
});
