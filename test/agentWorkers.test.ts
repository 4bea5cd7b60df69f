/**
 * The live agent with its asset runtimes on worker threads, over a real broker (aedes
 * in-process, or QBAND_TEST_BROKER): the same raises and clears, byte for byte, as with every
 * runtime in the agent's thread; every alarm event on disk in the journal, with the state it
 * came from, by the time a subscriber receives it; a map reload that keeps the dwell; an
 * operator command from another view; a clean stop that ends every worker thread and writes
 * every asset's last state.
 */
import { existsSync, readdirSync, readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { Journal, JOURNAL_FILE } from '../src/agent/journal.ts';
import { parseAssetMap } from '../src/config/parseAssetMap.ts';
import { collect, connectClient, type Inbox } from './support/mqttClients.ts';
import { eventually, memoryLogger, publishAll, SHORT_RUN_RAISE_S, liveSuite, tempDir, uniquePrefix } from './support/liveRig.ts';
import { POOL_ASSETS, poolMapText, poolMessages } from './support/poolRig.ts';

// As in agentLive.test.ts: one decision step after the exact time plus the tach's warm-up.
const EVENT_TOL_S = 0.3;

const suite = liveSuite();
const { running } = suite;

interface AlarmSeen {
  asset: string;
  payload: string;
  event: string;
  t_s: number;
  id: string;
  /** Whether the journal file already held the event when the subscriber received it. */
  journaled: boolean;
}

async function rig(workers: number) {
  const prefix = uniquePrefix();
  const dir = tempDir();
  const mapPath = join(dir, 'map.yaml');
  writeFileSync(mapPath, poolMapText(prefix, suite.broker.url));
  const stateDir = join(dir, 'state');
  const { logger, lines } = memoryLogger();
  const agent = await Agent.start({ mapPath, protocolVersion: suite.broker.protocolVersion, clientId: `qband-w-${prefix}`, tickMs: 200, stateDir, workers, watchMap: false }, { logger });
  running.push(agent);
  await agent.ready();
  const client = await connectClient({ url: suite.broker.url, protocolVersion: suite.broker.protocolVersion });
  running.push(client);
  const alarms: AlarmSeen[] = [];
  const journalPath = join(stateDir, JOURNAL_FILE);
  client.on('message', (topic, payload) => {
    const m = /\/([^/]+)\/alarm$/.exec(topic);
    if (!m) return;
    const text = payload.toString();
    const e = JSON.parse(text) as { event: string; t_s: number; id: string };
    // Read at once, in the subscriber: the event must already be on disk.
    alarms.push({ asset: m[1], payload: text, event: e.event, t_s: e.t_s, id: e.id, journaled: readFileSync(journalPath, 'utf8').includes(e.id) });
  });
  await client.subscribeAsync(`${prefix}/+/alarm`, { qos: 1 });
  const inbox: Inbox = collect(client);
  await client.subscribeAsync(`${prefix}/+/state`, { qos: 1 });
  const t0S = Date.now() / 1000 - 80;
  const { map } = parseAssetMap(readFileSync(mapPath, 'utf8'), mapPath);
  const messages = poolMessages(map!, prefix, t0S);
  return { prefix, mapPath, stateDir, agent, client, alarms, inbox, logs: lines, t0S, messages };
}

const cleared = (alarms: AlarmSeen[]) => POOL_ASSETS.every((a) => alarms.some((e) => e.asset === a && e.event === 'clear'));

describe('the live agent on worker threads', () => {
  it('raises and clears as in its own thread, each event journaled before it is published', async () => {
    const runs: AlarmSeen[][] = [];
    for (const workers of [0, 2]) {
      const r = await rig(workers);
      expect(r.agent.workers).toBe(workers);
      await publishAll(r.client, r.messages);
      await eventually(`a clear on every asset with ${workers} workers`, () => cleared(r.alarms), 20_000);
      expect(r.alarms.filter((a) => !a.journaled), 'events received before they were journaled').toEqual([]);
      // Relative to the run's start, so the two runs compare.
      runs.push(r.alarms.map((a) => ({ ...a, t_s: a.t_s - r.t0S })));
      const a = r.alarms.find((e) => e.asset === 'pump-a' && e.event === 'raise') as AlarmSeen;
      // pump-a plays the short run of liveRig.ts: its raise at the hand-computed time.
      expect(Math.abs(a.t_s - r.t0S - SHORT_RUN_RAISE_S), `pump-a raise at +${a.t_s - r.t0S}`).toBeLessThan(EVENT_TOL_S);
      await r.agent.stop();
    }
    const summary = (list: AlarmSeen[]) =>
      POOL_ASSETS.map((asset) => list.filter((e) => e.asset === asset).map((e) => `${e.event}@${e.t_s.toFixed(3)}`).join(' '));
    expect(summary(runs[1])).toEqual(summary(runs[0]));
  }, 60_000);

  it('keeps the dwell over a reload, takes a command from another view, and stops cleanly', async () => {
    const threadsBefore = existsSync('/proc/self/task') ? readdirSync('/proc/self/task').length : null;
    const r = await rig(2);
    const mid = r.messages.findIndex((m) => m.endS - r.t0S >= 6);
    await publishAll(r.client, r.messages.slice(0, mid));
    await eventually('decisions up to 5 s on pump-a', () =>
      r.inbox.messages.some((m) => m.topic === `${r.prefix}/pump-a/state` && JSON.parse(m.payload).t_s - r.t0S > 5),
    );
    // Every asset changes (another component's fn): each runtime is rebuilt on its worker from the old one's state.
    writeFileSync(r.mapPath, readFileSync(r.mapPath, 'utf8').replaceAll('fn_hz: 83.0', 'fn_hz: 84.0'));
    expect(await r.agent.reload()).toBe(true);
    await publishAll(r.client, r.messages.slice(mid));
    await eventually('a clear on every asset', () => cleared(r.alarms), 20_000);
    const raise = r.alarms.find((e) => e.asset === 'pump-a' && e.event === 'raise') as AlarmSeen;
    // As in agentLive.test.ts: a rebuilt asset re-acquires its tach, up to about 0.7 s.
    expect(raise.t_s - r.t0S - SHORT_RUN_RAISE_S, `raise at +${raise.t_s - r.t0S}`).toBeLessThan(EVENT_TOL_S + 0.7);
    expect(raise.t_s - r.t0S - SHORT_RUN_RAISE_S).toBeGreaterThan(-EVENT_TOL_S);
    const reloads = r.logs().filter((l) => l.code === 'QB_I_RELOAD' && l.asset !== undefined);
    expect(reloads.map((l) => l.asset).sort()).toEqual(POOL_ASSETS);
    expect(reloads.every((l) => (l.restored as string[]).includes('motor-reed/1x'))).toBe(true);

    // A command from another view (the operator page's path), answered after it is published.
    const out = await r.agent.command('pump-b', Buffer.from(JSON.stringify({ action: 'shelve', component: 'motor-reed', order: '1x', duration_s: 60, by: 'page' })));
    const shelve = out?.find((o) => o.kind === 'lifecycle');
    expect(shelve && JSON.parse(shelve.payload).event).toBe('shelve');
    await eventually('the shelve event on MQTT', () => r.alarms.find((e) => e.asset === 'pump-b' && e.event === 'shelve'));
    expect(await r.agent.command('no-such-asset', Buffer.from('{}'))).toBeNull();

    await r.agent.stop();
    // Every asset's last state written, and no worker thread left running.
    const journal = Journal.open(r.stateDir);
    for (const asset of POOL_ASSETS) expect(journal.snapshot(asset), `last state of ${asset}`).toBeDefined();
    journal.close();
    if (threadsBefore !== null) await eventually('the worker threads gone', () => readdirSync('/proc/self/task').length <= threadsBefore, 5000);
    expect(r.logs().filter((l) => l.code === 'QB_E_INTERNAL')).toEqual([]);
  }, 60_000);
});
