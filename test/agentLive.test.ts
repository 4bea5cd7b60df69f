import { readFileSync, writeFileSync } from 'node:fs';
import type { MqttClient } from 'mqtt';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { assetTopics } from '../src/agent/topics.ts';
import { connectClient, collect, type Inbox } from './support/mqttClients.ts';
import {
  blockMessages,
  eventually,
  interleave,
  loadAsset,
  memoryLogger,
  publishAll,
  SHORT_RUN_CLEAR_S,
  SHORT_RUN_RAISE_S,
  simulateRun,
  startTestBroker,
  tempDir,
  testWorkers,
  uniquePrefix,
  writeTestMap,
  type TestBroker,
} from './support/liveRig.ts';

// Integration over a real broker: aedes in-process by default, or QBAND_TEST_BROKER=<url>
// (CI also runs this file against the local Mosquitto). Data is published faster than real
// time, stamped in the recent past; every decision runs on those stamps, so the alarm times
// are the hand-computed ones of the short run (test/support/liveRig.ts SHORT_RUN).
// Tolerance for event times: one decision step (0.1 s) after the exact time, plus 0.2 s for
// the tach (averaged over 4 revolutions) and the first revolutions of warm-up.
const EVENT_TOL_S = 0.3;

let broker: TestBroker;
const running: Array<{ stop(): Promise<void> } | MqttClient> = [];

beforeAll(async () => {
  broker = await startTestBroker();
  console.info(`live agent suite against ${broker.name}`);
});
afterAll(async () => {
  await broker.close();
});
const retainedToClear: string[] = [];
afterEach(async () => {
  for (const r of running.splice(0)) {
    if ('endAsync' in r) await r.endAsync(true);
    else await r.stop();
  }
  // Leave no retained messages behind on a shared broker.
  if (retainedToClear.length) {
    const cleaner = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    await Promise.all(retainedToClear.splice(0).map((t) => cleaner.publishAsync(t, '', { qos: 1, retain: true })));
    await cleaner.endAsync();
  }
});

interface Rig {
  prefix: string;
  mapPath: string;
  agent: Agent;
  client: MqttClient;
  inbox: Inbox;
  logs: () => Array<Record<string, unknown>>;
  t0S: number;
}

async function rig(edit?: (text: string) => string, clientId = `qband-test-${Math.random().toString(36).slice(2, 8)}`): Promise<Rig> {
  const prefix = uniquePrefix();
  const mapPath = writeTestMap(tempDir(), prefix, broker.url, edit);
  const { logger, lines } = memoryLogger();
  const agent = await Agent.start({ mapPath, protocolVersion: broker.protocolVersion, clientId, tickMs: 200, workers: testWorkers() }, { logger });
  running.push(agent);
  retainedToClear.push(`${prefix}/cw-pump-2/state`, agent.statusTopic);
  await agent.ready();
  const client = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
  running.push(client);
  const inbox = collect(client);
  await client.subscribeAsync(`${prefix}/#`, { qos: 1 });
  // The run is stamped so that it ends a minute ago: in the past, never in the future.
  return { prefix, mapPath, agent, client, inbox, logs: lines, t0S: Date.now() / 1000 - 80 };
}

const alarmsOf = (r: Rig) =>
  r.inbox.messages.filter((m) => m.topic === `${r.prefix}/cw-pump-2/alarm`).map((m) => JSON.parse(m.payload) as Record<string, any>);

function runMessages(r: Rig, format: 'binary' | 'json') {
  const asset = loadAsset(r.mapPath);
  const topics = assetTopics(asset, r.prefix);
  const run = simulateRun(asset);
  const byChannel = new Map([...topics.samples].map(([topic, input]) => [input.channel, topic]));
  return interleave(...[0, 1].map((ch) => blockMessages(byChannel.get(ch)!, run.channels[ch], run.fs, r.t0S, 0.25, format)));
}

describe(`live agent over MQTT`, () => {
  for (const format of ['binary', 'json'] as const) {
    it(`raises and clears from ${format} sample blocks published faster than real time`, async () => {
      const r = await rig();
      await publishAll(r.client, runMessages(r, format));
      await eventually('a clear', () => alarmsOf(r).find((a) => a.event === 'clear'));
      const alarms = alarmsOf(r);
      expect(alarms.map((a) => [a.event, a.component, a.order])).toEqual([
        ['raise', 'motor-reed', '1x'],
        ['clear', 'motor-reed', '1x'],
      ]);
      const [raise, clear] = alarms;
      expect(Math.abs(raise.t_s - r.t0S - SHORT_RUN_RAISE_S), `raise at +${raise.t_s - r.t0S} s, expected +${SHORT_RUN_RAISE_S}`).toBeLessThan(EVENT_TOL_S);
      expect(Math.abs(clear.t_s - r.t0S - SHORT_RUN_CLEAR_S), `clear at +${clear.t_s - r.t0S} s, expected +${SHORT_RUN_CLEAR_S}`).toBeLessThan(EVENT_TOL_S);
      expect(raise.id).toMatch(/^[0-9a-f]{24}$/);
      expect(raise.id).not.toBe(clear.id);
      expect(raise.time).toBe(new Date(Math.round(raise.t_s * 1000)).toISOString());
      expect(raise.procedure).toContain('RM-12');
      expect(raise.advice).toMatch(/never stops the machine/);
    });
  }

  it('takes speed from its own topic, arriving out of step with the samples', async () => {
    const r = await rig((t) =>
      t.replace(
        'speed: { source: tach, channel: 1, pulses_per_rev: 1, range_rpm: [450, 1200] }',
        'speed: { source: topic, topic: SPEEDTOPIC, range_rpm: [450, 1200], max_age_s: 3 }',
      ).replace('SPEEDTOPIC', 'site-gw/cw-pump-2/speed'),
    );
    const asset = loadAsset(r.mapPath);
    const run = simulateRun({ ...asset, speed: { ...asset.speed, source: 'tach', channel: 1 } });
    const sensor = blockMessages(`${r.prefix}/cw-pump-2/samples/motor-top-x`, run.channels[0], run.fs, r.t0S);
    // Speed records every 0.1 s from the profile (hand formula of SHORT_RUN), sent in batches
    // of a second that run 2 s behind the samples: alignment is by time, not by arrival.
    const rpmAt = (t: number) => (t < 3 ? 700 : t < 5 ? 700 + 76 * (t - 3) : t < 13 ? 852 : t < 15 ? 852 + 49 * (t - 13) : 950);
    const speed = Array.from({ length: 200 }, (_, i) => ({ topic: 'site-gw/cw-pump-2/speed', payload: JSON.stringify({ t: r.t0S + i * 0.1, rpm: rpmAt(i * 0.1) }) }));
    const messages: Array<{ topic: string; payload: Buffer | string }> = [];
    sensor.forEach((m, i) => {
      messages.push(m);
      // After each 4 sample blocks (1 s), the speed of the second before last.
      if (i % 4 === 3 && i >= 8) messages.push(...speed.slice((i / 4 - 2) * 10 - 10 + 1, (i / 4 - 2) * 10 + 1));
    });
    messages.push(...speed.slice(Math.floor(sensor.length / 4 - 2) * 10 - 9));
    await publishAll(r.client, messages);
    await eventually('a clear', () => alarmsOf(r).find((a) => a.event === 'clear'));
    const alarms = alarmsOf(r);
    expect(alarms.map((a) => a.event)).toEqual(['raise', 'clear']);
    expect(Math.abs(alarms[0].t_s - r.t0S - SHORT_RUN_RAISE_S)).toBeLessThan(EVENT_TOL_S);
    expect(Math.abs(alarms[1].t_s - r.t0S - SHORT_RUN_CLEAR_S)).toBeLessThan(EVENT_TOL_S);
  });

  it('leaves a retained state for a subscriber that comes late', async () => {
    const r = await rig();
    await publishAll(r.client, runMessages(r, 'binary').slice(0, 40)); // first 5 s
    await eventually('a state message', () => r.inbox.messages.find((m) => m.topic === `${r.prefix}/cw-pump-2/state`));
    const late = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    running.push(late);
    const lateInbox = collect(late);
    await late.subscribeAsync(`${r.prefix}/cw-pump-2/state`, { qos: 1 });
    const state = await lateInbox.waitFor(`${r.prefix}/cw-pump-2/state`);
    expect(state.retain).toBe(true);
    const body = JSON.parse(state.payload);
    expect(body.kind).toBe('state');
    expect(body.speed_rpm).toBeGreaterThan(690);
    expect(body.orders.map((o: { order: string }) => o.order)).toEqual(['1x', '2x', 'vane-pass', 'motor-bpfo']);
    expect(body.freshness).toHaveProperty('stale');
  });

  it('publishes online presence, and offline as its last will when the connection dies', async () => {
    const r = await rig();
    const status = `${r.prefix}/agent/${r.agent.clientId}/status`;
    const watcher = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    running.push(watcher);
    const inbox = collect(watcher);
    await watcher.subscribeAsync(status, { qos: 1 });
    const online = await inbox.waitFor(status);
    expect(JSON.parse(online.payload)).toMatchObject({ state: 'online', site: 'north-basin', config_error: null });
    // Cut the agent's socket without DISCONNECT: the broker must publish the will.
    const before = inbox.messages.length;
    (r.agent as unknown as { client: MqttClient }).client.stream.destroy();
    const offline = await eventually('the last will', () =>
      inbox.messages.slice(before).find((m) => m.topic === status && JSON.parse(m.payload).state === 'offline'),
    );
    expect(JSON.parse(offline.payload).client_id).toBe(r.agent.clientId);
  });

  it('acknowledges and shelves on operator command, and refuses a bad one', async () => {
    const r = await rig();
    const messages = runMessages(r, 'binary');
    const raiseAt = messages.findIndex((m) => m.tS - r.t0S > SHORT_RUN_RAISE_S + 1);
    await publishAll(r.client, messages.slice(0, raiseAt));
    await eventually('the raise', () => alarmsOf(r).find((a) => a.event === 'raise'));
    const command = `${r.prefix}/cw-pump-2/command`;
    await r.client.publishAsync(command, JSON.stringify({ action: 'acknowledge', component: 'motor-reed', order: '1x', by: 'test operator' }), { qos: 1 });
    await eventually('the acknowledge event', () => alarmsOf(r).find((a) => a.event === 'acknowledge'));
    await r.client.publishAsync(command, JSON.stringify({ action: 'shelve', component: 'motor-reed', order: '1x', duration_s: 600, by: 'test operator' }), { qos: 1 });
    const shelve = await eventually('the shelve event', () => alarmsOf(r).find((a) => a.event === 'shelve'));
    expect(shelve.duration_s).toBe(600);
    expect(shelve.active).toBe(true);
    await r.client.publishAsync(command, JSON.stringify({ action: 'shelve', component: 'motor-reed', order: '9x', duration_s: 60 }), { qos: 1 });
    const rejected = await r.inbox.waitFor(`${command}/rejected`);
    expect(JSON.parse(rejected.payload).reason).toBe('unknown_alarm');
    // The rest of the run: the clear is held back while shelved, exposure still counts.
    await publishAll(r.client, messages.slice(raiseAt));
    const state = await eventually('a state after the run', () => {
      const states = r.inbox.messages.filter((m) => m.topic === `${r.prefix}/cw-pump-2/state`).map((m) => JSON.parse(m.payload));
      const last = states.at(-1);
      return last && last.t_s - r.t0S > SHORT_RUN_CLEAR_S + 1 ? last : undefined;
    });
    expect(alarmsOf(r).find((a) => a.event === 'clear')).toBeUndefined();
    expect(state.counters.alarm_events_shelved).toBeGreaterThanOrEqual(1);
    expect(state.exposure.find((e: { component: string }) => e.component === 'motor-reed').seconds_in_band).toBeGreaterThan(8);
    await r.client.publishAsync(command, JSON.stringify({ action: 'unshelve', component: 'motor-reed', order: '1x' }), { qos: 1 });
    await eventually('the unshelve event', () => alarmsOf(r).find((a) => a.event === 'unshelve'));
  });

  it('applies a valid map change keeping the dwell, and keeps the last good map on an invalid one', async () => {
    const r = await rig();
    const messages = runMessages(r, 'binary');
    // Stop in the middle of the on-delay (1X entered the band at 4.32 s; on-delay 3 s).
    const mid = messages.findIndex((m) => m.tS - r.t0S >= 6);
    await publishAll(r.client, messages.slice(0, mid));
    await eventually('decisions up to 5.5 s', () =>
      r.inbox.messages.some((m) => m.topic === `${r.prefix}/cw-pump-2/state` && JSON.parse(m.payload).t_s - r.t0S > 5),
    );
    // Valid change of another component: the reed's dwell must carry on.
    writeFileSync(r.mapPath, readFileSync(r.mapPath, 'utf8').replace('fn_hz: 83.0', 'fn_hz: 84.0'));
    expect(await r.agent.reload()).toBe(true);
    await publishAll(r.client, messages.slice(mid));
    await eventually('a clear', () => alarmsOf(r).find((a) => a.event === 'clear'));
    const raise = alarmsOf(r).find((a) => a.event === 'raise')!;
    // A reloaded asset re-acquires its tach (the first revolution at half the minimum speed is
    // ignored, then 4 revolutions are averaged): its clocks stop for up to about 0.7 s.
    expect(raise.t_s - r.t0S - SHORT_RUN_RAISE_S, `raise at +${raise.t_s - r.t0S}`).toBeLessThan(EVENT_TOL_S + 0.7);
    expect(raise.t_s - r.t0S - SHORT_RUN_RAISE_S).toBeGreaterThan(-EVENT_TOL_S);
    expect(r.logs().some((l) => l.code === 'QB_I_RELOAD' && Array.isArray(l.restored) && (l.restored as string[]).includes('motor-reed/1x'))).toBe(true);
    // Invalid change: refused, reported in the log and in the presence message.
    writeFileSync(r.mapPath, readFileSync(r.mapPath, 'utf8').replace('q: 8', 'q: 0.1'));
    expect(await r.agent.reload()).toBe(false);
    expect(r.logs().some((l) => l.code === 'QB_E_CONFIG_RELOAD')).toBe(true);
    const presence = await eventually('presence with the config error', () =>
      r.inbox.messages
        .filter((m) => m.topic === `${r.prefix}/agent/${r.agent.clientId}/status`)
        .map((m) => JSON.parse(m.payload))
        .find((p) => p.config_error !== null),
    );
    expect(presence.state).toBe('online');
    expect(presence.config_error.problems.join('\n')).toMatch(/q/);
  });

  it('resets history on a gap in seq and counts it, and still decides afterwards', async () => {
    const r = await rig();
    const messages = runMessages(r, 'binary');
    // Lose the sensor blocks of 1.0..1.5 s (seq 4 and 5): beyond the reorder window the
    // agent gives up on them, resets that channel's history and carries on.
    const lost = messages.filter((m) => m.topic.endsWith('motor-top-x') && (m.seq === 4 || m.seq === 5));
    await publishAll(r.client, messages.filter((m) => !lost.includes(m)));
    await eventually('a clear', () => alarmsOf(r).find((a) => a.event === 'clear'));
    const state = await eventually('a state with the gap counted', () =>
      r.inbox.messages
        .filter((m) => m.topic === `${r.prefix}/cw-pump-2/state`)
        .map((m) => JSON.parse(m.payload))
        .find((s) => (s.counters.reset_gap ?? 0) >= 1),
    );
    expect(state.counters.seq_missing).toBe(2);
    expect(r.logs().some((l) => l.code === 'QB_E_INPUT_DROPPED' && l.reason === 'gap' && l.sensor === 'motor-top-x')).toBe(true);
    expect(alarmsOf(r).map((a) => a.event)).toEqual(['raise', 'clear']);
  });
});
