/**
 * How the agent connects to its broker: client id, session, last will, reconnection.
 *
 * A persistent session: while the agent is away (a cut link, a restart) the broker keeps its
 * subscriptions and queues the QoS 1 sample blocks, speed records and commands for it, and
 * delivers them in order when it returns (docs/fleet.md, "Riding out an outage"). Under MQTT 5
 * the session lasts agent.session_expiry_s after the connection drops; under 3.1.1 until a
 * clean connection. It belongs to the client id, which must therefore stay the same.
 */
import { hostname } from 'node:os';
import type { IClientOptions } from 'mqtt';

export interface ConnectSpec {
  clientId: string;
  protocolVersion: 4 | 5;
  sessionExpiryS: number;
  /** Credentials, TLS and the like, from the caller: never logged. */
  extra?: Partial<IClientOptions>;
  /** Retained presence the broker publishes when the connection is lost without a goodbye. */
  will: { topic: string; payload: Buffer };
}

/**
 * mqtt.js's own debug lines (`DEBUG=mqttjs*`): without DEBUG in the environment they print
 * nothing, yet every call still gathers its arguments (several calls per sample block and per
 * PUBACK; measured by npm run bench:live, saturated level). The agent hands mqtt.js a no-op
 * instead, unless DEBUG is set, so those lines stay available to whoever asks for them.
 */
const quietMqttLog = (): void => undefined;

export function agentConnectOptions(spec: ConnectSpec): IClientOptions {
  return {
    ...(process.env.DEBUG ? {} : { log: quietMqttLog }),
    ...spec.extra,
    clientId: spec.clientId,
    protocolVersion: spec.protocolVersion,
    clean: false,
    ...(spec.protocolVersion === 5 ? { properties: { ...spec.extra?.properties, sessionExpiryInterval: spec.sessionExpiryS } } : {}),
    reconnectPeriod: 1000,
    connectTimeout: 10_000,
    will: { ...spec.will, qos: 1, retain: true },
  };
}

/** `qband-<site>-<hostname>`: stable across restarts of one box, distinct between boxes. */
export function defaultClientId(site: string): string {
  return `qband-${site}-${hostname()}`.replace(/[^A-Za-z0-9._-]/g, '-').slice(0, 64);
}

/** Broker URL without credentials, for logs. */
export function redactUrl(url: string): string {
  try {
    const u = new URL(url);
    if (u.username || u.password) {
      u.username = u.username ? '***' : '';
      u.password = u.password ? '***' : '';
    }
    return u.toString();
  } catch {
    return '(unparseable url)';
  }
}
