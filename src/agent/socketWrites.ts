/**
 * How the agent's socket writes: small packets (acknowledgements, alarms) go out at once, and the
 * acknowledgements of one read go out together.
 *
 * - No Nagle: alarm messages are small and urgent (measured: Nagle's algorithm added about 40 ms
 *   to each alarm's delivery).
 * - At QoS 1 every sample block is acknowledged with a PUBACK, which mqtt.js writes as soon as
 *   the block is handled: one `writev` system call per block, measured at about 30 % of the live
 *   agent's CPU (npm run bench:live, profile). The socket is corked when data arrives and uncorked
 *   once everything that data started has run (setImmediate: after the handlers and their
 *   callbacks, before any timer), so the PUBACKs and messages of one read leave in one call. Nothing
 *   waits for other data: a write is delayed by at most the handling of the read that caused it.
 *
 * Applied on every connection (mqtt.js makes a new stream for each reconnection). With worker
 * threads, messages held back by flow control are taken later, outside any read:
 * `holdAgentWrites` corks the socket the same way around that burst, so its acknowledgements
 * too leave in one call.
 */
import type { MqttClient } from 'mqtt';

interface Socketish {
  setNoDelay?: (on: boolean) => void;
  cork?: () => void;
  uncork?: () => void;
  prependListener?: (event: 'data', listener: () => void) => void;
}

const tuned = new WeakSet<object>();
/** Per stream: cork now (if not already) and uncork after the current turn of the event loop. */
const holds = new WeakMap<object, () => void>();

/** Corks the agent's socket until the current turn of the event loop has run (see above). */
export function holdAgentWrites(client: MqttClient): void {
  holds.get(client.stream as unknown as object)?.();
}

export function tuneAgentSocket(client: MqttClient): void {
  client.on('connect', () => {
    const stream = client.stream as unknown as Socketish;
    if (tuned.has(stream)) return;
    tuned.add(stream);
    stream.setNoDelay?.(true);
    const { cork, uncork, prependListener } = stream;
    if (!cork || !uncork || !prependListener) return;
    let corked = false;
    const release = (): void => {
      corked = false;
      uncork.call(stream);
    };
    const hold = (): void => {
      if (corked) return;
      corked = true;
      cork.call(stream);
      setImmediate(release);
    };
    holds.set(stream, hold);
    prependListener.call(stream, 'data', hold);
  });
}
