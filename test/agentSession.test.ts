import type { MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { collect, connectClient } from './support/mqttClients.ts';
import { eventually, memoryLogger, publishAll, SHORT_RUN_CLEAR_S, SHORT_RUN_RAISE_S, shortRunBlocks, startTestBroker, testWorkers, tempDir, uniquePrefix, writeTestMap, type TestBroker } from './support/liveRig.ts';

// The agent's persistent session over a real broker (aedes in-process by default, or
// QBAND_TEST_BROKER: CI runs it against Mosquitto and RabbitMQ's MQTT plugin too). What
// docs/fleet.md promises of any broker: sample blocks published at QoS 1 while the agent is
// away are kept in its session and delivered when it returns under the same client id, and the
// alarms come at the data times of an undisturbed run (SHORT_RUN in test/support/liveRig.ts).
// Tolerance as in agentLive.test.ts: one decision step plus the tach's warm-up.
const EVENT_TOL_S = 0.3;

let broker: TestBroker;
beforeAll(async () => {
  broker = await startTestBroker();
});
afterAll(async () => {
  await broker.close();
});

describe('the agent session over a real broker', () => {
  it('keeps QoS 1 sample blocks published while the agent is away and delivers them when it returns', async () => {
    const prefix = uniquePrefix();
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const stateDir = tempDir();
    const clientId = `qband-session-${process.pid}-${prefix.slice(-6)}`;
    const start = (lines: ReturnType<typeof memoryLogger>) =>
      Agent.start({ mapPath, protocolVersion: broker.protocolVersion, clientId, tickMs: 200, stateDir, watchMap: false, workers: testWorkers() }, { logger: lines.logger });

    const watcher: MqttClient = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    const inbox = collect(watcher);
    await watcher.subscribeAsync(`${prefix}/cw-pump-2/alarm`, { qos: 1 });
    const status = `${prefix}/agent/${clientId}/status`;
    const gateway = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    let agent: Agent | null = null;
    try {
      // First connection: the broker learns the session's subscriptions.
      agent = await start(memoryLogger());
      await agent.ready();
      await agent.stop();
      agent = null;

      // Away: the whole run is published and acknowledged by the broker.
      const t0S = Date.now() / 1000 - 80;
      await publishAll(gateway, shortRunBlocks(mapPath, prefix, t0S));

      const second = memoryLogger();
      agent = await start(second);
      await agent.ready();
      const connected = second.lines().find((l) => l.code === 'QB_I_CONNECTED');
      expect(connected?.session_present).toBe(true);
      const alarms = () => inbox.messages.filter((m) => m.topic === `${prefix}/cw-pump-2/alarm`).map((m) => JSON.parse(m.payload) as Record<string, any>);
      const raise = await eventually('the raise from queued blocks', () => alarms().find((a) => a.event === 'raise'), 30_000);
      const clear = await eventually('the clear from queued blocks', () => alarms().find((a) => a.event === 'clear'), 30_000);
      expect(Math.abs(raise.t_s - t0S - SHORT_RUN_RAISE_S), `raise at +${raise.t_s - t0S} s`).toBeLessThan(EVENT_TOL_S);
      expect(Math.abs(clear.t_s - t0S - SHORT_RUN_CLEAR_S), `clear at +${clear.t_s - t0S} s`).toBeLessThan(EVENT_TOL_S);
      expect(alarms().filter((a) => a.event === 'raise')).toHaveLength(1);
    } finally {
      await agent?.stop();
      // Leave nothing behind on a shared broker: the retained topics, and the session itself
      // (a clean connection under the same client id discards it).
      await Promise.all([status, `${prefix}/cw-pump-2/state`].map((t) => gateway.publishAsync(t, '', { qos: 1, retain: true })));
      const cleaner = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion, clientId, clean: true });
      await cleaner.endAsync();
      await gateway.endAsync();
      await watcher.endAsync();
    }
  });
});
