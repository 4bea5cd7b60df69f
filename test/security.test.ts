import { afterEach, describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { brokerCredentials } from '../src/agent/credentials.ts';
import { assetTopics } from '../src/agent/topics.ts';
import { generateTlsFiles, mosquittoAvailable, opensslAvailable, startMosquitto, type MosquittoBroker } from './support/mosquittoProcess.ts';
import { collect, connectClient } from './support/mqttClients.ts';
import {
  blockMessages,
  eventually,
  interleave,
  loadAsset,
  memoryLogger,
  publishAll,
  simulateRun,
  tempDir,
  uniquePrefix,
  writeTestMap,
} from './support/liveRig.ts';

// Access control with a real Mosquitto started by the test: TLS with a throwaway CA (openssl),
// the server's name checked, passwords, and an ACL per client in the shape of the one shipped in
// deploy/mosquitto/acl. The agent must work within its ACL (no refused publish or subscription)
// and never log its password.
const can = mosquittoAvailable() && opensslAvailable();
if (!can) console.warn('security suite skipped: mosquitto or openssl is missing');

const PASSWORDS = { 'qband-agent': 'agent-pw-5521', 'qband-gateway': 'gw-pw-1189', 'qband-operator': 'op-pw-7310' };
const acl = (p: string) => `user qband-agent
topic read ${p}/+/samples/+
topic read ${p}/+/command
topic write ${p}/#

user qband-gateway
topic write ${p}/+/samples/+

user qband-operator
topic read ${p}/#
topic write ${p}/+/command
`;

const cleanup: Array<() => Promise<unknown> | unknown> = [];
afterEach(async () => {
  for (const c of cleanup.splice(0).reverse()) await c();
});

async function secureBroker(prefix: string): Promise<MosquittoBroker> {
  const broker = await startMosquitto({ tls: true, auth: { users: PASSWORDS, acl: acl(prefix) } });
  cleanup.push(() => broker.stop());
  return broker;
}

describe.skipIf(!can)('TLS, passwords and ACL (real Mosquitto)', () => {
  it('runs the whole alarm path inside its ACL over TLS, and keeps its password out of the logs', async () => {
    const prefix = uniquePrefix();
    const broker = await secureBroker(prefix);
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const { logger, lines } = memoryLogger();
    const connectOptions = await brokerCredentials({ QBAND_MQTT_USERNAME: 'qband-agent', QBAND_MQTT_PASSWORD: PASSWORDS['qband-agent'] }, { ca: broker.ca }, '/');
    const agent = await Agent.start({ mapPath, protocolVersion: 5, connectOptions, tickMs: 200 }, { logger });
    cleanup.push(() => agent.stop());
    await agent.ready();
    const operator = await connectClient({ url: broker.url, ca: broker.ca, username: 'qband-operator', password: PASSWORDS['qband-operator'] });
    cleanup.push(() => operator.endAsync(true));
    const inbox = collect(operator);
    await operator.subscribeAsync(`${prefix}/#`, { qos: 1 });
    const gateway = await connectClient({ url: broker.url, ca: broker.ca, username: 'qband-gateway', password: PASSWORDS['qband-gateway'] });
    cleanup.push(() => gateway.endAsync(true));
    const asset = loadAsset(mapPath);
    const topics = assetTopics(asset, prefix);
    const run = simulateRun(asset);
    const t0S = Date.now() / 1000 - 80;
    const byChannel = new Map([...topics.samples].map(([topic, input]) => [input.channel, topic]));
    await publishAll(gateway, interleave(...[0, 1].map((ch) => blockMessages(byChannel.get(ch)!, run.channels[ch], run.fs, t0S))));
    await eventually('the clear', () => inbox.messages.find((m) => m.topic === topics.alarm && JSON.parse(m.payload).event === 'clear'), 15_000);
    await operator.publishAsync(topics.command, JSON.stringify({ action: 'shelve', component: 'motor-reed', order: '1x', duration_s: 60 }), { qos: 1 });
    await eventually('the shelve event', () => inbox.messages.find((m) => m.topic === topics.alarm && JSON.parse(m.payload).event === 'shelve'));
    const problems = lines().filter((l) => l.code === 'QB_E_PUBLISH' || l.code === 'QB_E_BROKER');
    expect(problems).toEqual([]);
    const all = JSON.stringify(lines());
    for (const pw of Object.values(PASSWORDS)) expect(all).not.toContain(pw);
  }, 30_000);

  it('does not connect to a broker whose certificate another CA signed', async () => {
    const prefix = uniquePrefix();
    const broker = await secureBroker(prefix);
    const other = generateTlsFiles(tempDir(), 'other');
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const { logger, lines } = memoryLogger();
    const connectOptions = await brokerCredentials({ QBAND_MQTT_USERNAME: 'qband-agent', QBAND_MQTT_PASSWORD: PASSWORDS['qband-agent'] }, { ca: other.ca }, '/');
    const agent = await Agent.start({ mapPath, protocolVersion: 5, connectOptions }, { logger });
    cleanup.push(() => agent.stop());
    const error = await eventually('a TLS error', () => lines().find((l) => l.code === 'QB_E_BROKER'), 8000);
    expect(String(error.err)).toMatch(/certificate|self.signed|unable to verify/i);
    expect(lines().some((l) => l.code === 'QB_I_CONNECTED')).toBe(false);
  }, 20_000);

  it('is refused with a wrong password, and says so without logging it', async () => {
    const prefix = uniquePrefix();
    const broker = await secureBroker(prefix);
    const mapPath = writeTestMap(tempDir(), prefix, broker.url);
    const { logger, lines } = memoryLogger();
    const connectOptions = await brokerCredentials({ QBAND_MQTT_USERNAME: 'qband-agent', QBAND_MQTT_PASSWORD: 'wrong-pw-0042' }, { ca: broker.ca }, '/');
    const agent = await Agent.start({ mapPath, protocolVersion: 5, connectOptions }, { logger });
    cleanup.push(() => agent.stop());
    const error = await eventually('a refusal', () => lines().find((l) => l.code === 'QB_E_BROKER'), 8000);
    expect(String(error.err)).toMatch(/not authorized|bad user name or password/i);
    expect(JSON.stringify(lines())).not.toContain('wrong-pw-0042');
  }, 20_000);

  it('refuses contradictory or unreadable credentials before connecting', async () => {
    await expect(brokerCredentials({ QBAND_MQTT_PASSWORD: 'x' }, {}, '/')).rejects.toThrow(/no QBAND_MQTT_USERNAME/);
    await expect(brokerCredentials({ QBAND_MQTT_USERNAME: 'u', QBAND_MQTT_PASSWORD: 'x', QBAND_MQTT_PASSWORD_FILE: '/nope' }, {}, '/')).rejects.toThrow(/not both/);
    await expect(brokerCredentials({ QBAND_MQTT_USERNAME: 'u', QBAND_MQTT_PASSWORD_FILE: '/nonexistent/secret' }, {}, '/')).rejects.toThrow(/cannot read QBAND_MQTT_PASSWORD_FILE file '\/nonexistent\/secret' \(ENOENT\)/);
  });
});
