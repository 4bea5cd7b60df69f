/**
 * The committed deploy/mosquitto/mosquitto.conf and acl run for real in a private Mosquitto
 * (paths and port moved to a temp dir) to show each user can do what the ACL promises and no
 * more. Reason codes: OASIS MQTT 5.0 section 2.4 (0x87 Not authorized).
 */
import { randomBytes } from 'node:crypto';
import type { MqttClient } from 'mqtt';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { aclText, agentUser, confText, inputTopics, prefix, siteMap } from './support/deploymentFiles.ts';
import { mosquittoAvailable, startMosquitto, type MosquittoBroker } from './support/mosquittoProcess.ts';
import { connectClient, connectCollecting, deliveredBeforeMarker, endAll, publishReason } from './support/mqttClients.ts';

const RC_NOT_AUTHORIZED = 0x87; // MQTT 5.0 section 2.4

// ---- the committed broker config, run for real --------------------------------------------

const available = mosquittoAvailable();
if (!available) console.warn('deploymentBroker.test.ts: live ACL checks skipped, no runnable mosquitto and mosquitto_passwd');

describe.skipIf(!available)('deployment: the committed mosquitto.conf and acl, running', () => {
  const passwords: Record<string, string> = {
    [agentUser]: randomBytes(12).toString('hex'),
    'qband-gateway': randomBytes(12).toString('hex'),
    'qband-operator': randomBytes(12).toString('hex'),
  };
  let live: MosquittoBroker;
  const clients: MqttClient[] = [];
  const login = async (user: string, extra: Partial<Parameters<typeof connectClient>[0]> = {}) => {
    const c = await connectCollecting({ url: live.url, username: user, password: passwords[user], ...extra });
    clients.push(c.client);
    return c;
  };
  const topics = siteMap ? inputTopics(siteMap) : [];
  const asset = siteMap?.assets[0].id ?? 'asset';

  beforeAll(async () => {
    live = await startMosquitto({ conf: { text: confText, files: {} }, auth: { users: passwords, acl: aclText } });
  });
  afterEach(async () => {
    await endAll(...clients.splice(0));
  });
  afterAll(async () => {
    await live?.stop();
  });

  it('refuses anonymous clients and wrong passwords', async () => {
    await expect(connectClient({ url: live.url })).rejects.toMatchObject({ code: RC_NOT_AUTHORIZED });
    await expect(connectClient({ url: live.url, username: agentUser, password: 'not-it' })).rejects.toThrow(/Not authorized|Bad User Name or Password/i);
  });

  it('the agent publishes under qband/ (state retained, alarm QoS 1) and an operator reads it', async () => {
    const { client: operator, inbox } = await login('qband-operator');
    await operator.subscribeAsync(`${prefix}/#`, { qos: 1 });
    const { client: agentClient } = await login(agentUser);
    expect(await publishReason(agentClient, `${prefix}/${asset}/state`, '{"kind":"state"}', true)).toBe(0);
    expect(await publishReason(agentClient, `${prefix}/${asset}/alarm`, '{"kind":"alarm"}')).toBe(0);
    expect((await inbox.waitFor(`${prefix}/${asset}/alarm`)).payload).toBe('{"kind":"alarm"}');
    expect((await inbox.waitFor(`${prefix}/${asset}/state`)).payload).toBe('{"kind":"state"}');
  });

  it('the agent cannot publish outside qband/: refused with 0x87 and not delivered', async () => {
    const { client: agentClient, inbox } = await login(agentUser);
    await agentClient.subscribeAsync([topics[0], `${prefix}/${asset}/command`], { qos: 1 });
    // The agent reads its inputs, so a delivered forgery on an input topic would reach it.
    const forged = await deliveredBeforeMarker(agentClient, inbox, topics[0], `${prefix}/${asset}/command`);
    expect(forged.reasonCode).toBe(RC_NOT_AUTHORIZED);
    expect(forged.arrived).toEqual([`${prefix}/${asset}/command`]);
    expect(await publishReason(agentClient, 'plant/elsewhere', 'x')).toBe(RC_NOT_AUTHORIZED);
  });

  it('the gateway writes every input topic of the map, which the agent receives, and nothing under qband/', async () => {
    const { client: agentClient, inbox } = await login(agentUser);
    await agentClient.subscribeAsync(topics, { qos: 1 });
    const { client: gateway } = await login('qband-gateway');
    for (const topic of topics) {
      expect(await publishReason(gateway, topic, '{"t":0,"fs":25600,"seq":0,"samples":[0]}'), topic).toBe(0);
      await inbox.waitFor(topic);
    }
    expect(await publishReason(gateway, `${prefix}/${asset}/alarm`, 'forged')).toBe(RC_NOT_AUTHORIZED);
    expect(await publishReason(gateway, `${prefix}/${asset}/command`, 'forged')).toBe(RC_NOT_AUTHORIZED);
  });

  it('an operator sends commands the agent receives, and cannot publish alarms or state', async () => {
    const { client: agentClient, inbox } = await login(agentUser);
    await agentClient.subscribeAsync(`${prefix}/+/command`, { qos: 1 });
    const { client: operator } = await login('qband-operator');
    expect(await publishReason(operator, `${prefix}/${asset}/command`, '{"action":"acknowledge"}')).toBe(0);
    await inbox.waitFor(`${prefix}/${asset}/command`);
    expect(await publishReason(operator, `${prefix}/${asset}/alarm`, 'forged')).toBe(RC_NOT_AUTHORIZED);
    expect(await publishReason(operator, `${prefix}/${asset}/state`, 'forged', true)).toBe(RC_NOT_AUTHORIZED);
  });

  it("the agent's last will on its presence topic reaches operators when it drops off", async () => {
    const presence = `${prefix}/agent/qband-edge-test/status`;
    const { client: operator, inbox } = await login('qband-operator');
    await operator.subscribeAsync(presence, { qos: 1 });
    const { client: agentClient } = await login(agentUser, {
      clientId: 'qband-edge-test',
      will: { topic: presence, payload: Buffer.from('offline'), qos: 1, retain: true },
    });
    await agentClient.publishAsync(presence, 'online', { qos: 1, retain: true });
    await inbox.waitFor(presence);
    const since = inbox.messages.length;
    agentClient.stream.destroy(); // a dropped link, not a clean DISCONNECT: the will is sent
    expect((await inbox.waitFor(presence, since)).payload).toBe('offline');
  });
});
