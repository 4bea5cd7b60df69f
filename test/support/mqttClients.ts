/**
 * mqtt.js clients for broker tests: connect once (no reconnect loop, bounded connect time),
 * collect what a subscriber receives, and prove that a publish was NOT delivered without
 * waiting for a timeout: a marker published after it by the same client on an allowed topic
 * arrives after it would have (the broker forwards one client's messages in order, MQTT 5.0
 * section 4.6 "Message ordering"), so once the marker is in, anything else would be too.
 */
import { readFileSync } from 'node:fs';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';

export interface ClientSpec {
  url: string;
  username?: string;
  password?: string;
  protocolVersion?: 4 | 5;
  clientId?: string;
  /** CA certificate path; the server name is checked against it. */
  ca?: string;
  servername?: string;
  cert?: string;
  key?: string;
  clean?: boolean;
  /** MQTT 5 session expiry, s (a persistent session outlives the connection). */
  sessionExpiryS?: number;
  will?: IClientOptions['will'];
}

const CONNECT_TIMEOUT_MS = 5000;

/** Connects once; rejects with the broker's refusal (or the TLS error) instead of retrying. */
export function connectClient(spec: ClientSpec, beforeConnect?: (client: MqttClient) => void): Promise<MqttClient> {
  const options: IClientOptions = {
    protocolVersion: spec.protocolVersion ?? 5,
    reconnectPeriod: 0,
    connectTimeout: CONNECT_TIMEOUT_MS,
    clean: spec.clean ?? true,
    ...(spec.clientId ? { clientId: spec.clientId } : {}),
    ...(spec.username !== undefined ? { username: spec.username } : {}),
    ...(spec.password !== undefined ? { password: spec.password } : {}),
    ...(spec.ca ? { ca: readFileSync(spec.ca), rejectUnauthorized: true } : {}),
    ...(spec.servername ? { servername: spec.servername } : {}),
    ...(spec.cert ? { cert: readFileSync(spec.cert) } : {}),
    ...(spec.key ? { key: readFileSync(spec.key) } : {}),
    ...(spec.sessionExpiryS !== undefined ? { properties: { sessionExpiryInterval: spec.sessionExpiryS } } : {}),
    ...(spec.will ? { will: spec.will } : {}),
  };
  return new Promise((resolve, reject) => {
    const client = mqtt.connect(spec.url, options);
    beforeConnect?.(client);
    const fail = (e: Error) => {
      client.off('close', closed);
      client.end(true);
      reject(e);
    };
    // A refusal at the TLS layer can surface as a close without an error event.
    const closed = () => fail(new Error(`connection to ${spec.url} closed before CONNACK`));
    client.once('connect', () => {
      client.off('error', fail);
      client.off('close', closed);
      resolve(client);
    });
    client.once('error', fail);
    client.once('close', closed);
  });
}

export interface Received {
  topic: string;
  payload: string;
  retain: boolean;
}

/** Everything a client receives from now on, and a way to wait for one topic. */
export interface Inbox {
  messages: Received[];
  /** The first message on `topic` at index `since` or later of `messages`. */
  waitFor(topic: string, since?: number, timeoutMs?: number): Promise<Received>;
}

export function collect(client: MqttClient): Inbox {
  const messages: Received[] = [];
  const waiters: Array<{ topic: string; resolve: (m: Received) => void }> = [];
  client.on('message', (topic, payload, packet) => {
    const m = { topic, payload: payload.toString(), retain: packet.retain };
    messages.push(m);
    for (const w of waiters.filter((x) => x.topic === topic)) {
      waiters.splice(waiters.indexOf(w), 1);
      w.resolve(m);
    }
  });
  return {
    messages,
    waitFor(topic, since = 0, timeoutMs = 5000) {
      const seen = messages.slice(since).find((m) => m.topic === topic);
      if (seen) return Promise.resolve(seen);
      return new Promise((resolve, reject) => {
        const timer = setTimeout(() => {
          reject(new Error(`no message on '${topic}' within ${timeoutMs} ms; received: ${JSON.stringify(messages.map((m) => m.topic))}`));
        }, timeoutMs);
        waiters.push({ topic, resolve: (m) => (clearTimeout(timer), resolve(m)) });
      });
    },
  };
}

/**
 * Connects with an inbox already listening, so messages a persistent session delivers right
 * after CONNACK are not missed.
 */
export async function connectCollecting(spec: ClientSpec): Promise<{ client: MqttClient; inbox: Inbox }> {
  let inbox: Inbox | undefined;
  const client = await connectClient(spec, (c) => {
    inbox = collect(c);
  });
  return { client, inbox: inbox! };
}

/** The reason code of a QoS 1 publish: 0 when accepted, the PUBACK reason code when refused. */
export async function publishReason(client: MqttClient, topic: string, payload: string, retain = false): Promise<number> {
  try {
    await client.publishAsync(topic, payload, { qos: 1, retain });
    return 0;
  } catch (e) {
    const code = (e as { code?: unknown }).code;
    if (typeof code === 'number') return code;
    throw e;
  }
}

/**
 * Publishes `topic` (expected to be refused or dropped), then `markerTopic` (allowed), both QoS 1
 * from `publisher`, waits for the marker at `inbox`, and returns the topics that arrived with it.
 */
export async function deliveredBeforeMarker(
  publisher: MqttClient,
  inbox: Inbox,
  topic: string,
  markerTopic: string,
): Promise<{ reasonCode: number; arrived: string[] }> {
  const before = inbox.messages.length;
  const reasonCode = await publishReason(publisher, topic, 'should-not-arrive');
  await publisher.publishAsync(markerTopic, 'marker', { qos: 1 });
  await inbox.waitFor(markerTopic, before);
  return { reasonCode, arrived: inbox.messages.slice(before).map((m) => m.topic) };
}

export async function endAll(...clients: Array<MqttClient | undefined>): Promise<void> {
  await Promise.all(clients.map((c) => (c ? c.endAsync(true) : undefined)));
}
