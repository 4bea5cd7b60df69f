/**
 * The private-broker harness works as the broker tests rely on: a real Mosquitto on a loopback
 * port, restartable on the same port, enforcing passwords, ACLs and TLS. Reason codes are the
 * ones the MQTT specifications define (OASIS MQTT 5.0 section 2.4 "Reason Code" and 3.4.2.1,
 * MQTT 3.1.1 section 3.2.2.3 "Connect Return code"); mqtt.js is the client.
 */
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { MqttClient } from 'mqtt';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { adoptConfig, generateTlsFiles, mosquittoAvailable, opensslAvailable, startMosquitto, type MosquittoBroker } from './support/mosquittoProcess.ts';
import { collect, connectClient, connectCollecting, deliveredBeforeMarker, endAll, publishReason } from './support/mqttClients.ts';

// MQTT 5.0 section 2.4 (Reason Code table); MQTT 3.1.1 section 3.2.2.3 (Connect Return code).
const RC_NOT_AUTHORIZED = 0x87;
const RC_BAD_USER_OR_PASSWORD = 0x86;
const RC311_BAD_USER_OR_PASSWORD = 4;
const RC311_NOT_AUTHORIZED = 5;

const available = mosquittoAvailable();
if (!available) console.warn('mosquittoHarness.test.ts skipped: no runnable mosquitto and mosquitto_passwd (set QBAND_TEST_MOSQUITTO to the broker binary)');
const tlsAvailable = available && opensslAvailable();
if (available && !tlsAvailable) console.warn('mosquittoHarness.test.ts: TLS cases skipped, openssl cannot be run');

const clients: MqttClient[] = [];
async function client(spec: Parameters<typeof connectClient>[0]): Promise<MqttClient> {
  const c = await connectClient(spec);
  clients.push(c);
  return c;
}
afterEach(async () => {
  await endAll(...clients.splice(0));
});

/** The error a refused connection gives, as `code` (number or string) and message. */
async function refusal(spec: Parameters<typeof connectClient>[0]): Promise<{ code: unknown; message: string }> {
  try {
    clients.push(await connectClient(spec));
  } catch (e) {
    return { code: (e as { code?: unknown }).code, message: (e as Error).message };
  }
  return { code: 'connected', message: 'the broker accepted the connection' };
}

describe.skipIf(!available)('mosquitto harness: plain broker', () => {
  it('starts on a loopback port, carries a message, and restarts on the same port', async () => {
    const broker = await startMosquitto();
    try {
      expect(broker.url).toBe(`mqtt://127.0.0.1:${broker.port}`);
      const sub = await client({ url: broker.url });
      const inbox = collect(sub);
      await sub.subscribeAsync('t/#', { qos: 1 });
      const pub = await client({ url: broker.url, protocolVersion: 4 });
      await pub.publishAsync('t/one', 'hello', { qos: 1 });
      expect((await inbox.waitFor('t/one')).payload).toBe('hello');

      const portBefore = broker.port;
      await broker.restart();
      expect(broker.port).toBe(portBefore);
      const again = await client({ url: broker.url });
      expect(again.connected).toBe(true);
    } finally {
      await broker.stop();
    }
    expect(existsSync(broker.dir), `temp dir ${broker.dir} left behind`).toBe(false);
  });

  it('starts a new broker on the port a stopped one used (port option)', async () => {
    const first = await startMosquitto();
    const port = first.port;
    await first.stop();
    const second = await startMosquitto({ port });
    try {
      expect(second.port).toBe(port);
      expect((await client({ url: second.url })).connected).toBe(true);
    } finally {
      await second.stop();
    }
  });

  it('keeps a QoS 1 message for a persistent session across a broker restart (persistence)', async () => {
    const broker = await startMosquitto({ persistence: true });
    try {
      const sub = await connectClient({ url: broker.url, clientId: 'qband-harness-persistent', clean: false, sessionExpiryS: 600 });
      await sub.subscribeAsync('queued/#', { qos: 1 });
      await sub.endAsync();
      const pub = await client({ url: broker.url });
      await pub.publishAsync('queued/alarm', 'while-away', { qos: 1 });
      await broker.restart();
      const { client: back, inbox } = await connectCollecting({ url: broker.url, clientId: 'qband-harness-persistent', clean: false, sessionExpiryS: 600 });
      clients.push(back);
      expect((await inbox.waitFor('queued/alarm')).payload).toBe('while-away');
    } finally {
      await broker.stop();
    }
  });

  it('restarts after a crash (kill) and stop still removes the temp dir', async () => {
    const broker = await startMosquitto();
    broker.kill();
    await broker.restart();
    expect((await client({ url: broker.url })).connected).toBe(true);
    await broker.stop();
    expect(existsSync(broker.dir)).toBe(false);
  });

  it('fails with the log tail when Mosquitto rejects its config', async () => {
    const error = await startMosquitto({ conf: { text: 'listener 1883\nnot_an_option true\n' } }).then(
      () => new Error('started'),
      (e: Error) => e,
    );
    expect(error.message).toMatch(/mosquitto exited with code \d+ before listening/);
    expect(error.message).toContain('not_an_option');
  });

});

describe('mosquitto harness: adopting a committed config (no broker needed)', () => {
  it('adoptConfig moves the one listener and every file path into the temp dir', () => {
    const adopted = adoptConfig('listener 1883\npassword_file /mosquitto/config/passwords\nacl_file /mosquitto/config/acl\npersistence_location /mosquitto/data/\n', '/tmp/x', 40001);
    expect(adopted.text).toContain('listener 40001 127.0.0.1');
    expect(adopted.passwordFile).toBe('/tmp/x/passwords');
    expect(adopted.aclFile).toBe('/tmp/x/acl');
    expect(adopted.text).toContain('persistence_location /tmp/x/');
    expect(adopted.text).not.toContain('/mosquitto/');
    expect(() => adoptConfig('listener 1883\nlistener 8883\n', '/tmp/x', 40001)).toThrow(/more than one listener/);
  });
});

describe.skipIf(!available)('mosquitto harness: passwords and ACL', () => {
  let broker: MosquittoBroker;
  const users = { writer: 'writer-pw-1', reader: 'reader-pw-2' };
  const acl = ['user writer', 'topic write site/writer/#', 'topic write marker/#', '', 'user reader', 'topic read #', ''].join('\n');
  beforeAll(async () => {
    broker = await startMosquitto({ auth: { users, acl } });
  });
  afterAll(async () => {
    await broker?.stop();
  });

  it('refuses a wrong password (MQTT 5 and 3.1.1) and accepts the right one', async () => {
    const v5 = await refusal({ url: broker.url, username: 'writer', password: 'wrong' });
    // Either refusal code is allowed by MQTT 5.0 section 3.2.2.2; Mosquitto 2.0.11 sends 0x87.
    expect([RC_BAD_USER_OR_PASSWORD, RC_NOT_AUTHORIZED], v5.message).toContain(v5.code);
    const v311 = await refusal({ url: broker.url, username: 'writer', password: 'wrong', protocolVersion: 4 });
    // Both codes refuse the connection (MQTT 3.1.1 section 3.2.2.3); Mosquitto sends 5.
    expect([RC311_BAD_USER_OR_PASSWORD, RC311_NOT_AUTHORIZED], v311.message).toContain(v311.code);
    const anonymous = await refusal({ url: broker.url });
    expect(anonymous.code, anonymous.message).toBe(RC_NOT_AUTHORIZED);
    expect((await client({ url: broker.url, username: 'writer', password: users.writer })).connected).toBe(true);
  });

  it('MQTT 5: a publish outside the user prefix is refused (0x87) and not delivered', async () => {
    const reader = await client({ url: broker.url, username: 'reader', password: users.reader });
    const inbox = collect(reader);
    await reader.subscribeAsync('#', { qos: 1 });
    const writer = await client({ url: broker.url, username: 'writer', password: users.writer });
    expect(await publishReason(writer, 'site/writer/ok', 'in')).toBe(0);
    await inbox.waitFor('site/writer/ok');
    const outside = await deliveredBeforeMarker(writer, inbox, 'site/other/x', 'marker/v5');
    expect(outside.reasonCode).toBe(RC_NOT_AUTHORIZED);
    expect(outside.arrived).toEqual(['marker/v5']);
  });

  it('MQTT 3.1.1: a publish outside the user prefix never arrives (checked against a later marker)', async () => {
    const reader = await client({ url: broker.url, username: 'reader', password: users.reader, protocolVersion: 4 });
    const inbox = collect(reader);
    await reader.subscribeAsync('#', { qos: 1 });
    const writer = await client({ url: broker.url, username: 'writer', password: users.writer, protocolVersion: 4 });
    const outside = await deliveredBeforeMarker(writer, inbox, 'site/other/y', 'marker/v311');
    expect(outside.arrived).toEqual(['marker/v311']);
  });
});

describe.skipIf(!tlsAvailable)('mosquitto harness: TLS', () => {
  let broker: MosquittoBroker;
  let otherDir: string;
  beforeAll(async () => {
    broker = await startMosquitto({ tls: true });
    otherDir = mkdtempSync(join(tmpdir(), 'qband-other-ca-'));
  });
  afterAll(async () => {
    await broker?.stop();
    if (otherDir) rmSync(otherDir, { recursive: true, force: true });
  });

  it('connects with the CA, checking the server name (127.0.0.1 and localhost)', async () => {
    expect(broker.url).toBe(`mqtts://127.0.0.1:${broker.port}`);
    expect((await client({ url: broker.url, ca: broker.ca })).connected).toBe(true);
    expect((await client({ url: `mqtts://localhost:${broker.port}`, ca: broker.ca, servername: 'localhost' })).connected).toBe(true);
  });

  it('fails with another CA', async () => {
    const other = generateTlsFiles(otherDir, 'other');
    const r = await refusal({ url: broker.url, ca: other.ca });
    expect(r.code, r.message).toMatch(/SELF_SIGNED|UNABLE_TO_VERIFY|UNABLE_TO_GET_ISSUER/);
  });

  it('fails when the server name is not in the certificate', async () => {
    const r = await refusal({ url: broker.url, ca: broker.ca, servername: 'broker.elsewhere.invalid' });
    expect(r.code, r.message).toBe('ERR_TLS_CERT_ALTNAME_INVALID');
  });

  it('require_certificate: refuses a client without a certificate and accepts the issued one', async () => {
    const strict = await startMosquitto({ tls: { requireCertificate: true } });
    try {
      const r = await refusal({ url: strict.url, ca: strict.ca });
      expect(r.code, r.message).not.toBe('connected');
      const ok = await client({ url: strict.url, ca: strict.ca, cert: strict.clientCert, key: strict.clientKey });
      expect(ok.connected).toBe(true);
    } finally {
      await strict.stop();
    }
  });
});
