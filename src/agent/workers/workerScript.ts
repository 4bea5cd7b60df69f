/**
 * Starts a runtime worker thread, from the build or from the sources. In `dist/` every module
 * is bundled into `dist/cli/`, the worker's entry among them (`entryPoints` in
 * scripts/build.mjs), so it lies beside the chunk holding this code as `runtimeWorker.js`.
 * From the sources (vitest, the benchmarks through tsx) this module is a `.ts` file and the
 * entry is `runtimeWorker.ts` beside it: the worker registers tsx (a development dependency,
 * present wherever the sources run) before importing it, since a worker thread does not
 * inherit its parent's loaders.
 */
import { createRequire } from 'node:module';
import { pathToFileURL } from 'node:url';
import { Worker } from 'node:worker_threads';

export function startRuntimeWorker(): Worker {
  const here = import.meta.url;
  if (!here.endsWith('.ts')) return new Worker(new URL('./runtimeWorker.js', here));
  const tsxApi = pathToFileURL(createRequire(here).resolve('tsx/esm/api')).href.replace(/\.cjs$/, '.mjs');
  const entry = new URL('./runtimeWorker.ts', here).href;
  const boot = `import(${JSON.stringify(tsxApi)}).then((api) => { api.register(); return import(${JSON.stringify(entry)}); });`;
  return new Worker(boot, { eval: true });
}
