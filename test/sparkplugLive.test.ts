import { readFileSync, writeFileSync } from 'node:fs';
import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import sparkplugPayload from 'sparkplug-payload';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { connectClient } from './support/mqttClients.ts';
import { eventually, memoryLogger, publishAll, shortRunBlocks, startTestBroker, tempDir, uniquePrefix, writeTestMap, type TestBroker, testWorkers } from './support/liveRig.ts';

// A SCADA-style host application against the live agent's Sparkplug B output over a real broker
// (aedes in-process, or QBAND_TEST_BROKER): it decodes every message with the published codec
// and checks what a host relies on (Eclipse Sparkplug 3.0, rules from memory): NBIRTH first with
// seq 0, a device's DBIRTH before its DDATA, seq going up by one mod 256 across the node's
// messages, NDEATH on an abrupt loss carrying the bdSeq of the NBIRTH it ends, the next
// connection's NBIRTH with the next bdSeq, a rebirth on NCMD.
const codec = sparkplugPayload.get('spBv1.0')!;

let broker: TestBroker;
beforeAll(async () => {
  broker = await startTestBroker();
});
afterAll(async () => {
  await broker.close();
});

interface Received {
  type: string;
  device: string | null;
  seq: number | null;
  metrics: Map<string, unknown>;
}

function received(topic: string, payload: Buffer): Received {
  const [, , type, , device] = topic.split('/');
  const p = codec.decodePayload(payload);
  const metrics = new Map((p.metrics ?? []).map((m) => [m.name ?? '', typeof m.value === 'object' && m.value !== null && 'low' in m.value ? Number(m.value) : m.value]));
  return { type, device: device ?? null, seq: p.seq === null || p.seq === undefined ? null : Number(p.seq), metrics };
}

describe('Sparkplug B output over a real broker', () => {
  it('births, data, rebirth on NCMD, NDEATH on an abrupt loss with the matching bdSeq, a new bdSeq after reconnecting', async () => {
    const prefix = uniquePrefix();
    const group = `qbt-${prefix.slice(-6)}`;
    const mapPath = writeTestMap(tempDir(), prefix, broker.url, (t) => `${t}\nsparkplug: { group_id: ${group}, edge_node_id: edge-1, min_data_interval_s: 0 }\n`);
    const host = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    const seen: Received[] = [];
    host.on('message', (topic, payload) => {
      if (topic.startsWith(`spBv1.0/${group}/`) && !topic.includes('/NCMD/')) seen.push(received(topic, payload));
    });
    await host.subscribeAsync(`spBv1.0/${group}/#`, { qos: 1 });

    const clients: MqttClient[] = [];
    const connect = (url: string, options: IClientOptions) => {
      const c = mqtt.connect(url, options);
      clients.push(c);
      return c;
    };
    const { logger, lines } = memoryLogger();
    const stateDir = tempDir();
    const agent = await Agent.start({ mapPath, protocolVersion: broker.protocolVersion, clientId: `qband-spb-${process.pid}`, tickMs: 200, stateDir, workers: testWorkers() }, { logger, connect });
    try {
      await agent.ready();
      await eventually('NBIRTH', () => seen.find((r) => r.type === 'NBIRTH'));
      const bdSeq = seen.find((r) => r.type === 'NBIRTH')!.metrics.get('bdSeq') as number;

      await publishAll(host, shortRunBlocks(mapPath, prefix, Date.now() / 1000 - 80));
      await eventually('DDATA with an active alarm', () => seen.find((r) => r.type === 'DDATA' && r.metrics.get('alarms/active_count') === 1), 30_000);
      await eventually('DDATA with the alarm cleared', () => seen.find((r) => r.type === 'DDATA' && r.metrics.get('alarms/active_count') === 0), 30_000);
      const raised = seen.find((r) => r.type === 'DDATA' && r.metrics.get('alarms/active_count') === 1)!;
      expect(raised.device).toBe('cw-pump-2');

      // Rebirth on request.
      const countBefore = seen.length;
      await host.publishAsync(`spBv1.0/${group}/NCMD/edge-1`, Buffer.from(codec.encodePayload({ timestamp: Date.now(), metrics: [{ name: 'Node Control/Rebirth', type: 'Boolean', value: true }] })), { qos: 0 });
      await eventually('a rebirth', () => seen.slice(countBefore).find((r) => r.type === 'DBIRTH'));

      // Abrupt loss of the Sparkplug connection (no DISCONNECT): the broker sends the will.
      const spb = clients.find((c) => String(c.options.clientId).endsWith('-spb'))!;
      const beforeLoss = seen.length;
      spb.stream.destroy();
      const death = await eventually('NDEATH', () => seen.slice(beforeLoss).find((r) => r.type === 'NDEATH'), 15_000);
      expect(death.metrics.get('bdSeq')).toBe(bdSeq);
      expect(death.seq).toBeNull();
      const reborn = await eventually('NBIRTH after reconnecting', () => seen.slice(beforeLoss).find((r) => r.type === 'NBIRTH'), 15_000);
      expect(reborn.metrics.get('bdSeq')).toBe((bdSeq + 1) % 256);
      await eventually('DBIRTH after reconnecting', () => seen.slice(seen.indexOf(reborn)).find((r) => r.type === 'DBIRTH'));
      // A second loss: the will registered by the reconnection carries the new bdSeq.
      const beforeSecond = seen.length;
      spb.stream.destroy();
      const secondDeath = await eventually('a second NDEATH', () => seen.slice(beforeSecond).find((r) => r.type === 'NDEATH'), 15_000);
      expect(secondDeath.metrics.get('bdSeq')).toBe((bdSeq + 1) % 256);
      const third = await eventually('a third NBIRTH', () => seen.slice(beforeSecond).find((r) => r.type === 'NBIRTH'), 15_000);
      expect(third.metrics.get('bdSeq')).toBe((bdSeq + 2) % 256);

      // The host's rules over everything received.
      expect(seen[0].type).toBe('NBIRTH');
      let born = new Set<string>();
      let lastSeq: number | null = null;
      for (const r of seen) {
        if (r.type === 'NDEATH') {
          lastSeq = null;
          continue;
        }
        if (r.type === 'NBIRTH') {
          expect(r.seq).toBe(0);
          expect(r.metrics.get('Node Control/Rebirth')).toBe(false);
          born = new Set();
        } else {
          expect(r.seq, `${r.type} seq after ${lastSeq}`).toBe(((lastSeq ?? -1) + 1) % 256);
        }
        if (r.type === 'DBIRTH') born.add(r.device!);
        if (r.type === 'DDATA') expect(born.has(r.device!), `DDATA of ${r.device} before its DBIRTH`).toBe(true);
        lastSeq = r.seq;
      }
      const birth = seen.find((r) => r.type === 'DBIRTH')!;
      for (const name of ['speed_rpm', 'orders/1x/separation_pct', 'alarms/active_count', 'alarms/highest_priority', 'components/motor-reed/exposure_s', 'components/motor-reed/exposure_cycles', 'data_age_s']) {
        expect(birth.metrics.has(name), name).toBe(true);
      }
      expect(lines().some((l) => l.code === 'QB_I_SPARKPLUG_BIRTH' && l.cause === 'rebirth')).toBe(true);
    } finally {
      const beforeStop = seen.length;
      await agent.stop();
      await eventually('NDEATH on a clean stop', () => seen.slice(beforeStop).find((r) => r.type === 'NDEATH'));
      await host.endAsync();
    }
  });

  it('devices come and go with the map: a second asset is born, and dies when a reload removes it', async () => {
    const prefix = uniquePrefix();
    const group = `qbt-${prefix.slice(-6)}`;
    const spb = `sparkplug: { group_id: ${group}, edge_node_id: edge-2, min_data_interval_s: 0 }\n`;
    const twoAssets = (t: string) => {
      const asset = t.slice(t.indexOf('  - id: cw-pump-2'));
      return `${t}\n${asset.replace('id: cw-pump-2', 'id: cw-pump-3')}\n${spb}`;
    };
    const mapPath = writeTestMap(tempDir(), prefix, broker.url, twoAssets);
    const host = await connectClient({ url: broker.url, protocolVersion: broker.protocolVersion });
    const seen: Received[] = [];
    host.on('message', (topic, payload) => {
      if (topic.startsWith(`spBv1.0/${group}/`)) seen.push(received(topic, payload));
    });
    await host.subscribeAsync(`spBv1.0/${group}/#`, { qos: 1 });
    const { logger } = memoryLogger();
    const agent = await Agent.start({ mapPath, protocolVersion: broker.protocolVersion, clientId: `qband-spb2-${process.pid}`, tickMs: 200, watchMap: false, workers: testWorkers() }, { logger });
    try {
      await agent.ready();
      // With no data, each asset's state says so on the stale tick: both devices are born.
      await eventually('both DBIRTHs', () => ['cw-pump-2', 'cw-pump-3'].every((d) => seen.some((r) => r.type === 'DBIRTH' && r.device === d)), 15_000);
      const oneAsset = writeTestMap(tempDir(), prefix, broker.url, (t) => `${t}\n${spb}`);
      writeFileSync(mapPath, readFileSync(oneAsset, 'utf8'));
      expect(await agent.reload()).toBe(true);
      const death = await eventually('DDEATH of the removed asset', () => seen.find((r) => r.type === 'DDEATH'), 15_000);
      expect(death.device).toBe('cw-pump-3');
      const index = seen.indexOf(death);
      expect(seen.slice(index + 1).some((r) => r.device === 'cw-pump-3')).toBe(false);
      expect(death.seq).toBe((seen[index - 1].seq! + 1) % 256);
    } finally {
      await agent.stop();
      await host.endAsync();
    }
  });
});
