/**
 * A TCP proxy for outage tests, between a client and its broker on loopback. Three behaviours
 * of a real network, switched by the test:
 *   pass       bytes flow both ways;
 *   blackhole  connections stay open but every byte either way is silently discarded (a
 *              dead route: neither side learns anything until its own timeouts);
 *   refuse     existing connections are cut (reset) and new ones are reset on arrival.
 */
import { createServer, connect, type Server, type Socket } from 'node:net';

export type ProxyMode = 'pass' | 'blackhole' | 'refuse';

export interface TcpProxy {
  url: string;
  port: number;
  mode: ProxyMode;
  setMode(mode: ProxyMode): void;
  /** Connections accepted (and let through) so far. */
  readonly accepted: number;
  /** Connections reset on arrival while refusing. */
  readonly refused: number;
  close(): Promise<void>;
}

export async function startTcpProxy(targetPort: number, targetHost = '127.0.0.1'): Promise<TcpProxy> {
  const pairs = new Set<[Socket, Socket]>();
  let mode: ProxyMode = 'pass';
  let accepted = 0;
  let refused = 0;
  const server: Server = createServer((client) => {
    if (mode === 'refuse') {
      refused++;
      client.resetAndDestroy();
      return;
    }
    accepted++;
    const upstream = connect({ host: targetHost, port: targetPort });
    const pair: [Socket, Socket] = [client, upstream];
    pairs.add(pair);
    const forward = (from: Socket, to: Socket) =>
      from.on('data', (chunk) => {
        if (mode === 'pass') to.write(chunk);
      });
    forward(client, upstream);
    forward(upstream, client);
    const end = () => {
      pairs.delete(pair);
      client.destroy();
      upstream.destroy();
    };
    for (const s of pair) {
      s.on('error', end);
      s.on('close', end);
    }
  });
  await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
  const port = (server.address() as { port: number }).port;
  return {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    get mode() {
      return mode;
    },
    setMode(next: ProxyMode) {
      mode = next;
      if (next === 'refuse') {
        for (const [client, upstream] of pairs) {
          client.resetAndDestroy();
          upstream.resetAndDestroy();
        }
        pairs.clear();
      }
    },
    get accepted() {
      return accepted;
    },
    get refused() {
      return refused;
    },
    close() {
      mode = 'refuse';
      for (const [client, upstream] of pairs) {
        client.destroy();
        upstream.destroy();
      }
      return new Promise((resolve) => server.close(() => resolve()));
    },
  };
}
