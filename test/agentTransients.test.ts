/**
 * The live agent and transients, over a real broker (aedes in-process, or QBAND_TEST_BROKER):
 * a run-up through the demo map's motor-reed band is published as sample blocks; the agent
 * publishes the transient on <prefix>/<asset>/transient and the band it measured on
 * <prefix>/<asset>/identified, keeps the transient in its state directory, and a restarted
 * agent finds it there.
 *
 * The run comes from qband's simulator with the demo map's motor-reed (fn 14.2 Hz, Q 8); the
 * expected fn and Q are those map values, the parameters the simulator was given.
 */
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { Agent } from '../src/agent/agent.ts';
import { assetTopics } from '../src/agent/topics.ts';
import { collect, connectClient } from './support/mqttClients.ts';
import {
  blockMessages,
  eventually,
  interleave,
  loadAsset,
  memoryLogger,
  publishAll,
  simulateRun,
  liveSuite,
  tempDir,
  uniquePrefix,
  writeTestMap,
  testWorkers,
} from './support/liveRig.ts';

/** 600 rpm, then a run-up through the reed band (800-907 rpm) at 50 rpm/s, then held. */
const RUN_UP = `
sample_rate_hz: 2560
start_rpm: 600
segments:
  - { hold_s: 3 }
  - { ramp_to_rpm: 1100, over_s: 10 }
  - { hold_s: 8 }
forcing: { 1x: 0.02, vane-pass: 0.01 }
noise_g: 0.002
seed: 5
`;

const suite = liveSuite();
const { running } = suite;

describe('live agent: transients and identification', () => {
  it('publishes the run-up, the band it measured, and keeps the run-up across a restart', async () => {
    const prefix = uniquePrefix();
    const dir = tempDir();
    const stateDir = join(dir, 'state');
    const mapPath = writeTestMap(dir, prefix, suite.broker.url);
    const { logger } = memoryLogger();
    const agent = await Agent.start({ mapPath, protocolVersion: suite.broker.protocolVersion, clientId: `qband-tr-${prefix}`, tickMs: 200, stateDir, workers: testWorkers() }, { logger });
    running.push(agent);
    await agent.ready();
    const client = await connectClient({ url: suite.broker.url, protocolVersion: suite.broker.protocolVersion });
    running.push(client);
    const inbox = collect(client);
    await client.subscribeAsync([`${prefix}/cw-pump-2/transient`, `${prefix}/cw-pump-2/identified`], { qos: 1 });

    const asset = loadAsset(mapPath);
    const run = simulateRun(asset, RUN_UP);
    const t0S = Date.now() / 1000 - 60;
    const topics = assetTopics(asset, prefix);
    await publishAll(client, interleave(...[...topics.samples].map(([topic, input]) => blockMessages(topic, run.channels[input.channel], run.fs, t0S))));

    const transient = await eventually('a transient', () => inbox.messages.find((m) => m.topic.endsWith('/transient')), 20_000);
    const t = JSON.parse(transient.payload) as Record<string, any>;
    expect(t.kind).toBe('transient');
    expect(t.direction).toBe('up');
    // The ramp runs from 3 s to 13 s of the run, 600 to 1100 rpm.
    expect(Math.abs(t.t_start_s - t0S - 3)).toBeLessThan(0.5);
    expect(Math.abs(t.speed_to_rpm - 1100)).toBeLessThan(15);
    expect(t.phase_reference).toBe('once-per-rev mark');
    const identified = await eventually('an identification', () => inbox.messages.find((m) => m.topic.endsWith('/identified')), 20_000);
    const id = JSON.parse(identified.payload) as Record<string, any>;
    expect([id.kind, id.component, id.order]).toEqual(['identified', 'motor-reed', '1x']);
    expect(Math.abs(id.fn_hz - 14.2) / 14.2).toBeLessThan(0.005);
    expect(Math.abs(id.q - 8) / 8).toBeLessThan(0.1);
    expect(id.advice).toMatch(/never stops the machine|confirm/);

    // Kept in the state directory, and found again by a restarted agent.
    const file = join(stateDir, 'transients-cw-pump-2.json');
    expect(existsSync(file)).toBe(true);
    expect((JSON.parse(readFileSync(file, 'utf8')) as unknown[]).length).toBe(1);
    await agent.stop();
    running.splice(running.indexOf(agent), 1);
    const again = memoryLogger();
    const restarted = await Agent.start({ mapPath, protocolVersion: suite.broker.protocolVersion, clientId: `qband-tr2-${prefix}`, tickMs: 200, stateDir, workers: testWorkers() }, { logger: again.logger });
    running.push(restarted);
    const restored = again.lines().find((l) => l.code === 'QB_I_TRANSIENTS');
    expect(restored?.transients).toBe(1);
  }, 60_000);
});
