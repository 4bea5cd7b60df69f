/**
 * A throwaway MQTT broker inside the demo process, so `npm start` needs no broker installed.
 *
 * It listens on an OS-chosen free port of the loopback interface only (never a fixed 1883,
 * which a real broker on the same box may hold), keeps nothing on disk and is gone with
 * close(). It speaks MQTT 3.1.1 only: clients of it connect with protocolVersion 4.
 */
import { createServer, type Server, type Socket } from 'node:net';
import { Aedes } from 'aedes';

export interface EmbeddedBroker {
  /** mqtt://127.0.0.1:<port> */
  url: string;
  port: number;
  /** MQTT protocol level to connect with: 4 (3.1.1). */
  protocolVersion: 4;
  /** Stops listening, drops every client and releases the port. Safe to call twice. */
  close(): Promise<void>;
}

const LOOPBACK = '127.0.0.1';

export async function startEmbeddedBroker(): Promise<EmbeddedBroker> {
  const aedes = await Aedes.createBroker();
  const sockets = new Set<Socket>();
  const server: Server = createServer((socket) => {
    sockets.add(socket);
    socket.once('close', () => sockets.delete(socket));
    aedes.handle(socket);
  });
  await new Promise<void>((resolve, reject) => {
    server.once('error', reject);
    server.listen(0, LOOPBACK, () => {
      server.off('error', reject);
      resolve();
    });
  });
  const address = server.address();
  const port = typeof address === 'object' && address !== null ? address.port : 0;

  let closing: Promise<void> | null = null;
  const close = (): Promise<void> => {
    closing ??= (async () => {
      const serverClosed = new Promise<void>((resolve) => server.close(() => resolve()));
      await new Promise<void>((resolve) => aedes.close(() => resolve()));
      // A client that never completed its CONNECT is unknown to the broker: end its socket too.
      for (const s of sockets) s.destroy();
      await serverClosed;
    })();
    return closing;
  };
  return { url: `mqtt://${LOOPBACK}:${port}`, port, protocolVersion: 4, close };
}
