/**
 * The live agent with its operator page on a real broker, for the page's HTTP and browser
 * tests: the short run of liveRig (raise and clear times worked out by hand there), a test
 * client subscribed to everything the agent publishes, and the page served on a free port.
 */
import type { MqttClient } from 'mqtt';
import { Agent } from '../../src/agent/agent.ts';
import { assetTopics } from '../../src/agent/topics.ts';
import { startPageServer, type PageServer } from '../../src/page/pageServer.ts';
import { collect, connectClient, type Inbox } from './mqttClients.ts';
import { blockMessages, interleave, loadAsset, memoryLogger, simulateRun, tempDir, uniquePrefix, writeTestMap, type BlockMessage, type TestBroker } from './liveRig.ts';

export const TEST_TOKEN = 'test-token-0123456789abcdef';

export interface PageRig {
  prefix: string;
  agent: Agent;
  page: PageServer;
  client: MqttClient;
  inbox: Inbox;
  logs: () => Array<Record<string, unknown>>;
  t0S: number;
  messages: BlockMessage[];
  alarms: () => Array<Record<string, any>>;
  /** Wall time (ms) each message reached the test client, by index in inbox.messages. */
  arrivals: number[];
  stop(): Promise<void>;
}

export async function pageRig(broker: TestBroker, token: string | null = TEST_TOKEN, port = 0): Promise<PageRig> {
  const prefix = uniquePrefix();
  const mapPath = writeTestMap(tempDir(), prefix, broker.url);
  const { logger, lines } = memoryLogger();
  const agent = await Agent.start({ mapPath, protocolVersion: broker.protocolVersion, clientId: `qband-page-${Math.random().toString(36).slice(2, 8)}`, tickMs: 200 }, { logger });
  await agent.ready();
  const page = await startPageServer(agent, { host: '127.0.0.1', port }, { logger, token });
  const client = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
  const inbox = collect(client);
  const arrivals: number[] = [];
  client.on('message', () => arrivals.push(Date.now()));
  await client.subscribeAsync(`${prefix}/#`, { qos: 1 });
  const t0S = Date.now() / 1000 - 80;
  const asset = loadAsset(mapPath);
  const topics = assetTopics(asset, prefix);
  const run = simulateRun(asset);
  const byChannel = new Map([...topics.samples].map(([topic, input]) => [input.channel, topic]));
  const messages = interleave(...[0, 1].map((ch) => blockMessages(byChannel.get(ch)!, run.channels[ch], run.fs, t0S, 0.25)));
  const alarms = () => inbox.messages.filter((m) => m.topic === `${prefix}/cw-pump-2/alarm`).map((m) => JSON.parse(m.payload) as Record<string, any>);
  return {
    prefix,
    agent,
    page,
    client,
    inbox,
    logs: lines,
    t0S,
    messages,
    alarms,
    arrivals,
    stop: async () => {
      await page.close();
      await client.endAsync(true);
      // Retained state and presence of this run's prefix are emptied.
      const cleaner = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
      await agent.stop();
      await Promise.all([`${prefix}/cw-pump-2/state`, agent.statusTopic].map((t) => cleaner.publishAsync(t, '', { qos: 1, retain: true })));
      await cleaner.endAsync();
    },
  };
}
