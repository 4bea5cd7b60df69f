/**
 * A runtime worker that ends unasked is started again with its assets, each resumed from the
 * last state the pool saw of it: the assets it held go on being watched (they still raise and
 * clear), and the log says what happened. Past the allowed restarts the log says to restart the
 * agent instead.
 */
import { describe, expect, it } from 'vitest';
import type { Worker } from 'node:worker_threads';
import type { LogSink } from '../src/agent/transientStore.ts';
import type { HostResult } from '../src/agent/workers/runtimeHost.ts';
import { createRuntimeHost } from '../src/agent/workers/workerCount.ts';
import { POOL_ASSETS, poolMap, poolMessages, poolSpecs } from './support/poolRig.ts';

const PREFIX = 'restarttest';
const T0_S = Math.floor(Date.now() / 1000) - 600;

describe('a runtime worker that fails', () => {
  it('is started again with its assets, which go on raising and clearing', async () => {
    const { map, text } = poolMap(PREFIX);
    const messages = poolMessages(map, PREFIX, T0_S);
    const lines: Array<{ level: string; fields: Record<string, unknown>; msg: string }> = [];
    const log: LogSink = {
      info: (fields, msg) => lines.push({ level: 'info', fields, msg }),
      warn: (fields, msg) => lines.push({ level: 'warn', fields, msg }),
      error: (fields, msg) => lines.push({ level: 'error', fields, msg }),
    };
    const seen: HostResult[] = [];
    const host = createRuntimeHost(2, { result: (r) => seen.push(r), load: () => undefined, log: () => undefined }, log);
    await host.add(poolSpecs(map, text, PREFIX));
    const killAt = Math.floor(messages.length / 4);
    let killed: string[] = [];
    for (let i = 0; i < messages.length; i++) {
      const m = messages[i];
      const nowMs = Math.round(m.endS * 1000) + 40;
      if (i === killAt) {
        // Everything so far handled and each asset's state taken, as the agent's periodic tick does.
        host.tick(nowMs, true);
        await host.snapshots();
        const slot = (host as unknown as { slots: Array<{ worker: Worker }> }).slots[0];
        await slot.worker.terminate();
        for (let w = 0; w < 100 && !lines.some((l) => l.fields.code === 'QB_I_WORKER_RESTART'); w++) await new Promise((r) => setTimeout(r, 50));
        killed = lines.find((l) => l.fields.code === 'QB_E_INTERNAL')?.fields.assets as string[];
      }
      host.message(m.asset, m.topic, Buffer.from(m.payload), nowMs);
      if (host.saturated) await new Promise<void>((resume) => host.whenReady(resume));
    }
    await host.stop();

    expect(killed.length, 'the failed worker held assets').toBeGreaterThan(0);
    const failure = lines.find((l) => l.fields.code === 'QB_E_INTERNAL');
    expect(failure?.msg).toMatch(/started again, its assets resumed from their last state/);
    expect(lines.some((l) => l.fields.code === 'QB_I_WORKER_RESTART' && l.fields.worker === 0)).toBe(true);
    for (const id of POOL_ASSETS) {
      const events = seen.flatMap((r) => r.out.filter((o) => o.topic === `${PREFIX}/${id}/alarm`).map((o) => (JSON.parse(String(o.payload)) as { event: string }).event));
      expect(events, `alarm events of ${id}${killed.includes(id) ? ' (its worker was restarted)' : ''}`).toEqual(expect.arrayContaining(['raise', 'clear']));
    }
  }, 60_000);
});
