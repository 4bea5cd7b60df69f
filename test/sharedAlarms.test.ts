import type { MqttClient } from 'mqtt';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { collect, connectClient, type Inbox } from './support/mqttClients.ts';
import { eventually, memoryLogger, publishAll, shortRunBlocks, startTestBroker, tempDir, uniquePrefix, writeTestMap, type TestBroker, testWorkers } from './support/liveRig.ts';

// The plant pattern of docs/fleet.md: alarm consumers share the load with a shared subscription
// (`$share/<group>/<filter>`), and a historian beside them sees every alarm. Needs a broker with
// shared subscriptions: Mosquitto has them (CI runs this file against it); aedes and RabbitMQ
// 3.10's MQTT plugin have none (docs/fleet.md), and there the test skips and says so after a probe.

let broker: TestBroker;
const open: MqttClient[] = [];
beforeAll(async () => {
  broker = await startTestBroker();
});
afterAll(async () => {
  for (const c of open.splice(0)) await c.endAsync(true);
  await broker.close();
});

async function client(): Promise<MqttClient> {
  const c = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
  open.push(c);
  return c;
}

/** Two members of a probe group and four messages: shared means each delivered exactly once. */
async function sharedSubscriptionsWork(): Promise<boolean> {
  const topic = `${uniquePrefix()}/probe`;
  const members = [await client(), await client()];
  const inboxes = members.map(collect);
  for (const m of members) await m.subscribeAsync(`$share/probe/${topic}`, { qos: 1 });
  const publisher = await client();
  // A plain subscriber tells when all four have been routed (one publisher's messages keep order).
  const plain = await client();
  const plainInbox = collect(plain);
  await plain.subscribeAsync(topic, { qos: 1 });
  await publishAll(publisher, [1, 2, 3, 4].map((n) => ({ topic, payload: String(n) })));
  await eventually('the probe through a plain subscription', () => plainInbox.messages.length === 4);
  const delivered = inboxes.flatMap((i) => i.messages.map((m) => m.payload)).sort();
  return delivered.join() === '1,2,3,4';
}

describe('alarm consumers sharing the load', () => {
  it('hands each alarm to one member of a shared subscription, and every alarm to a plain subscriber', async (ctx) => {
    if (!(await sharedSubscriptionsWork())) {
      console.warn(`shared alarm consumers skipped: ${broker.name} does not deliver $share/ subscriptions (docs/fleet.md)`);
      ctx.skip();
    }
    const prefix = uniquePrefix();
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const clientId = `qband-share-${process.pid}-${prefix.slice(-6)}`;
    const members = [await client(), await client()];
    const inboxes: Inbox[] = members.map(collect);
    for (const m of members) await m.subscribeAsync(`$share/alarm-handlers/${prefix}/+/alarm`, { qos: 1 });
    const historian = await client();
    const all = collect(historian);
    await historian.subscribeAsync(`${prefix}/+/alarm`, { qos: 1 });

    const agent = await Agent.start({ mapPath, protocolVersion: broker.protocolVersion, clientId, tickMs: 200, watchMap: false, workers: testWorkers() }, { logger: memoryLogger().logger });
    try {
      await agent.ready();
      const gateway = await client();
      await publishAll(gateway, shortRunBlocks(mapPath, prefix, Date.now() / 1000 - 80));
      const ids = (inbox: Inbox) => inbox.messages.filter((m) => m.topic === `${prefix}/cw-pump-2/alarm`).map((m) => JSON.parse(m.payload).id as string);
      const events = (inbox: Inbox) => inbox.messages.filter((m) => m.topic === `${prefix}/cw-pump-2/alarm`).map((m) => JSON.parse(m.payload).event as string);
      await eventually('raise and clear at the historian', () => events(all).includes('clear'), 30_000);
      // The group's copies were routed with the historian's (the same publish); wait for both.
      await eventually('raise and clear in the group', () => inboxes.flatMap(events).includes('clear'));
      const shared = inboxes.flatMap(ids).sort();
      expect(ids(all)).toHaveLength(2);
      expect(shared, 'each alarm once across the group, none twice').toEqual([...ids(all)].sort());
    } finally {
      await agent.stop();
      const cleaner = await client();
      await Promise.all([agent.statusTopic, `${prefix}/cw-pump-2/state`].map((t) => cleaner.publishAsync(t, '', { qos: 1, retain: true })));
      const session = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion, clientId, clean: true });
      await session.endAsync();
    }
  });
});
