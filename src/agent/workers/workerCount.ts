/**
 * How many worker threads the runtimes get, and the host that follows from it.
 *
 * `auto`: one worker per core (`os.availableParallelism()`), never more than there are assets
 * (an asset's runtime is one ordered stream and never spans two threads), and none for a map
 * of one asset or on a single core. N workers beside the agent's thread is one thread more
 * than cores on purpose: the agent's thread only parses MQTT, routes and publishes (about 12 %
 * of the CPU in `npm run bench:workers`). One asset gets no worker: the hop costs CPU and a
 * second heap (about 40 MiB in the soak, up to some 20 MiB more with WORKER_HEAP_FLAGS) and, measured with `npm run bench:live`, the engine
 * running beside the socket did not make up for it on two cores.
 */
import { availableParallelism } from 'node:os';
import type { LogSink } from '../transientStore.ts';
import { InThreadHost } from './inThreadHost.ts';
import type { HostSink, RuntimeHost } from './runtimeHost.ts';
import { WorkerPool } from './workerPool.ts';

/** The most workers `--workers` accepts. */
export const MAX_WORKERS = 64;

export type WorkerSetting = number | 'auto';

export function autoWorkerCount(assets: number, cores = availableParallelism()): number {
  if (cores < 2 || assets < 2) return 0;
  return Math.min(cores, assets);
}

export function workerCountFor(setting: WorkerSetting, assets: number): number {
  return setting === 'auto' ? autoWorkerCount(assets) : setting;
}

/** Reads `--workers`: a whole number from 0 to MAX_WORKERS, or `auto`. */
export function parseWorkerSetting(text: string): { setting: WorkerSetting } | { fault: string } {
  if (text === 'auto') return { setting: 'auto' };
  const n = /^\d+$/.test(text) ? Number(text) : NaN;
  if (Number.isInteger(n) && n >= 0 && n <= MAX_WORKERS) return { setting: n };
  return { fault: `--workers must be auto or a whole number from 0 to ${MAX_WORKERS}` };
}

/** The in-thread host for 0 workers, else a pool of that many. */
export function createRuntimeHost(workers: number, sink: HostSink, log: LogSink): RuntimeHost {
  return workers === 0 ? new InThreadHost(sink, log) : new WorkerPool(workers, sink, log);
}
