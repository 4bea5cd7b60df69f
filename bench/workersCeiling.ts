/**
 * What the machine gives, for bench:workers to be read against: how much faster two threads
 * run than one on a busy loop, and on the bench's own work split with nothing between the
 * threads (each thread its own assets, fed by itself, no agent's thread routing, no ring, no
 * answers). The second is the ceiling of the worker pool on this machine: on a virtual machine
 * two threads of the engine can run much slower side by side than one alone (shared cache and
 * memory bandwidth, a neighbour on the host) even where a busy loop doubles.
 */
import { performance } from 'node:perf_hooks';
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { setFlagsFromString } from 'node:v8';
import { Worker } from 'node:worker_threads';
import { WORKER_HEAP_FLAGS } from '../src/agent/workers/workerScript.ts';

const BUSY = `const { parentPort } = require('node:worker_threads'); parentPort.on('message', (n) => { let x = 0; const a = new Float64Array(4096); for (let i = 0; i < n; i++) { const j = i & 4095; a[j] = a[j] * 0.5 + Math.sqrt(i); x += a[j]; } parentPort.postMessage(x); });`;

/**
 * The machine's own parallel speed-up now: the same busy loop on two threads against one
 * (ideal 2.00 on two free cores). The machine is shared: when another process takes a core,
 * no worker count can give 1.7x, and this says so beside each round's ratio.
 */
export async function machineSpeedup(): Promise<number> {
  const time = async (threads: number) => {
    const ws = Array.from({ length: threads }, () => new Worker(BUSY, { eval: true }));
    const t0 = performance.now();
    await Promise.all(ws.map((w) => new Promise((done) => (w.once('message', done), w.postMessage(1e8)))));
    const ms = performance.now() - t0;
    await Promise.all(ws.map((w) => w.terminate()));
    return ms;
  };
  const one = await time(1);
  const two = await time(2);
  return (2 * one) / two;
}

/** One part's timed span (ms, absolute), as a part posts it back. */
export interface PartSpan {
  startMs: number;
  endMs: number;
}

/**
 * Runs `script` (this bench, from the sources: tsx registered in each thread) on `parts`
 * threads at once, thread i with `--part i --of parts` added to `argv`; each posts its
 * PartSpan. Returns the wall time from the first start to the last end. The threads' isolates
 * are configured as the pool's workers are (WORKER_HEAP_FLAGS).
 */
export async function splitRun(script: string, argv: string[], parts: number): Promise<number> {
  setFlagsFromString(WORKER_HEAP_FLAGS);
  const tsxApi = pathToFileURL(createRequire(import.meta.url).resolve('tsx/esm/api')).href.replace(/\.cjs$/, '.mjs');
  const entry = pathToFileURL(script).href;
  const boot = `import(${JSON.stringify(tsxApi)}).then((api) => { api.register(); return import(${JSON.stringify(entry)}); });`;
  const spans = await Promise.all(
    Array.from({ length: parts }, (_, i) => {
      const w = new Worker(boot, { eval: true, argv: [...argv, '--part', String(i), '--of', String(parts)] });
      return new Promise<PartSpan>((resolve, reject) => {
        w.once('message', (m: PartSpan) => void w.terminate().then(() => resolve(m)));
        w.once('error', reject);
      });
    }),
  );
  return (Math.max(...spans.map((s) => s.endMs)) - Math.min(...spans.map((s) => s.startMs))) / 1000;
}
