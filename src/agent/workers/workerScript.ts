/**
 * Starts a runtime worker thread, from the build or from the sources. In `dist/` every module
 * is bundled into `dist/cli/`, the worker's entry among them (`entryPoints` in
 * scripts/build.mjs), so it lies beside the chunk holding this code as `runtimeWorker.js`.
 * From the sources (vitest, the benchmarks through tsx) this module is a `.ts` file and the
 * entry is `runtimeWorker.ts` beside it: the worker registers tsx (a development dependency,
 * present wherever the sources run) before importing it, since a worker thread does not
 * inherit its parent's loaders.
 *
 * A worker's young generation starts at the size the agent's thread's reaches while it runs the
 * engine (WORKER_HEAP_FLAGS). A fresh isolate starts with 1 MiB semi-spaces and V8 grows them on
 * the bytes that survive; a runtime worker's few survivors left them at 8 MiB, where the agent's
 * thread had 16: twice the scavenges, more objects promoted, and a mark-compact every few MiB of
 * them (`node --trace-gc`: 41 scavenges and 7 mark-compacts in a run of `npm run bench:workers`
 * against 23 and 3 with the flag). In valgrind's instruction counts of that bench's timed part
 * with one worker, V8's helper threads (concurrent marking and sweeping, optimizing compiles)
 * did 0.54 to 0.74 G instructions before and 0.24 G after, the engine's own thread 3.8 G in
 * either case and 0.17 G of helpers with the engine in the agent's thread.
 */
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { setFlagsFromString } from 'node:v8';
import { Worker } from 'node:worker_threads';

/**
 * V8 flags for the isolates created after them, that is the workers' (the agent's own isolate
 * was configured at its start and keeps its heap): 16 MiB semi-spaces from the start, the most a
 * worker's young generation takes with Node's default limits (48 MiB), so about 16 MiB more
 * memory per worker than a fresh isolate's first seconds. An old generation first collected at
 * 64 MiB as well (`--initial-old-space-size`) cut mark-compacts from 3 to 2 but cost that much
 * more memory for no difference that stood out of the machine's spread; not taken.
 */
export const WORKER_HEAP_FLAGS = '--min-semi-space-size=16';

let flagsSet = false;

export function startRuntimeWorker(): Worker {
  if (!flagsSet) {
    setFlagsFromString(WORKER_HEAP_FLAGS);
    flagsSet = true;
  }
  const here = import.meta.url;
  if (!here.endsWith('.ts')) return new Worker(new URL('./runtimeWorker.js', here));
  const tsxApi = pathToFileURL(createRequire(here).resolve('tsx/esm/api')).href.replace(/\.cjs$/, '.mjs');
  const entry = new URL('./runtimeWorker.ts', here).href;
  const boot = `import(${JSON.stringify(tsxApi)}).then((api) => { api.register(); return import(${JSON.stringify(entry)}); });`;
  return new Worker(boot, { eval: true });
}
