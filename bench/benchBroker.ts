/**
 * Fallback broker of the live bench when no Mosquitto answers on 127.0.0.1:1883: aedes (MQTT
 * 3.1.1) in a process of its own, so that its CPU is neither the agent's nor the publisher's.
 * Sends {port} over IPC once listening; exits when the bench disconnects.
 */
import { createServer } from 'node:net';
import { Aedes } from 'aedes';

const aedes = await Aedes.createBroker();
const server = createServer(aedes.handle);
server.listen(0, '127.0.0.1', () => {
  process.send?.({ port: (server.address() as { port: number }).port });
});
process.on('disconnect', () => {
  server.close();
  aedes.close(() => process.exit(0));
});
