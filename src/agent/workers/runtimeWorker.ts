/**
 * The entry of a runtime worker thread (bundled as `dist/cli/runtimeWorker.js`): a
 * `RuntimeGroup` holding the assets the pool gave this worker, fed the inputs the agent's
 * thread routed here, in their order. Its log lines go back to the agent's logger with their
 * codes; the overload rule runs on this worker's own busy time.
 */
import { parentPort, threadId } from 'node:worker_threads';
import type { LogSink } from '../transientStore.ts';
import { unpackMessages } from './messagePacker.ts';
import type { AnswerEntry, WorkerInput, WorkerOutput } from './protocol.ts';
import { RuntimeGroup } from './runtimeGroup.ts';

const port = parentPort;
if (!port) throw new Error('runtimeWorker.ts runs in a worker thread only');

const send = (m: WorkerOutput) => port.postMessage(m);
const forward = (level: 'info' | 'warn' | 'error') => (fields: Record<string, unknown>, msg: string) => send({ kind: 'log', line: { level, fields: { ...fields, thread: threadId }, msg } });
const log: LogSink = { info: forward('info'), warn: forward('warn'), error: forward('error') };
const group = new RuntimeGroup(log);
/** The shared ring the packed messages lie in, and where each is copied out to be handled. */
let ring = new SharedArrayBuffer(0);
let scratch: Uint8Array = new Uint8Array(64 * 1024);
/** Route numbers of packed messages: asset and topic. */
const routes: Array<{ asset: string; topic: string }> = [];

/** Batches are handled one after the other (building a runtime may wait for its FFT). */
let queue: Promise<void> = Promise.resolve();
port.on('message', (batch: WorkerInput[]) => {
  queue = queue.then(() => handle(batch));
});

async function handle(batch: WorkerInput[]): Promise<void> {
  const entries: AnswerEntry[] = [];
  for (const input of batch) {
    try {
      await handleOne(input, entries);
    } catch (err) {
      // Only building a runtime can throw here (the group catches the runtimes' own failures).
      if ('id' in input && input.id !== undefined) entries.push({ kind: 'reply', id: input.id, value: { error: String((err as Error).stack) } });
    }
  }
  send({ kind: 'answers', entries, handled: batch.reduce((n, input) => n + (input.op === 'messages' ? input.routes.length : input.op === 'ring' ? 0 : 1), 0) });
}

async function handleOne(input: WorkerInput, entries: AnswerEntry[]): Promise<void> {
  switch (input.op) {
    case 'ring':
      ring = input.ring;
      return;
    case 'messages':
      scratch = unpackMessages(ring, input, scratch, (route, payload, nowMs) => {
        const r = routes[route];
        const result = group.message(r.asset, r.topic, payload, nowMs);
        if (result && worthSending(result)) entries.push({ kind: 'result', result });
      });
      return;
    case 'route':
      routes[input.route] = { asset: input.asset, topic: input.topic };
      return;
    case 'command': {
      const result = group.message(input.asset, null, new Uint8Array(input.payload), input.nowMs);
      entries.push(result ? { kind: 'result', result, id: input.id } : { kind: 'reply', id: input.id, value: null });
      return;
    }
    case 'tick': {
      const change = group.sampleLoad();
      if (change) entries.push({ kind: 'load', change });
      for (const result of group.tick(input.nowMs, input.persist)) if (worthSending(result)) entries.push({ kind: 'result', result });
      return;
    }
    case 'add':
      entries.push({ kind: 'reply', id: input.id, value: await group.build(input.spec) });
      return;
    case 'replace':
      entries.push({ kind: 'reply', id: input.id, value: await group.replace(input.spec) });
      return;
    case 'remove':
      group.remove(input.asset);
      entries.push({ kind: 'reply', id: input.id, value: null });
      return;
    case 'snapshots':
      entries.push({ kind: 'reply', id: input.id, value: group.snapshots() });
  }
}

/** Most sample blocks produce nothing: those go back as a count only. */
function worthSending(r: { out: unknown[]; drops: unknown[]; snapshot?: unknown; failed?: unknown }): boolean {
  return r.out.length > 0 || r.drops.length > 0 || r.snapshot !== undefined || r.failed !== undefined;
}
