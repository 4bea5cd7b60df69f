// Preloaded into the soak's agent (`node --import bench/soakMemory.mjs bin/qband.mjs run ...`),
// and so into each of its worker threads, which inherit the option. Every line it appends to the
// file named by QBAND_SOAK_MEMORY_FILE is JSON (bytes) and names its thread (`thread`: 0 the
// agent's, else a worker's id). Once a second: process.memoryUsage() and the sizes of V8's young
// and old generations, as the thread sees them. After each full (mark-compact) collection: a line
// with `retained`, what the thread keeps alive (a leak raises it; garbage does not), exactly for
// the collections the soak asks for (`asked`), roughly for V8's own. Plain JavaScript so any
// build of qband can be measured with it.
import { appendFileSync } from 'node:fs';
import { PerformanceObserver, constants, performance } from 'node:perf_hooks';
import { getHeapSpaceStatistics } from 'node:v8';
import { BroadcastChannel, isMainThread, threadId } from 'node:worker_threads';

const file = process.env.QBAND_SOAK_MEMORY_FILE;
const write = (line) => {
  try {
    appendFileSync(file, `${JSON.stringify({ t: Date.now(), thread: threadId, ...line })}\n`);
  } catch {
    // The bench went away; nothing to report to.
  }
};
// What the thread keeps alive, bytes: old generation, large objects and code, and the array buffers
// (their memory is given back by a sweeper after the collection, so right after one it may still
// count dead buffers).
const kept = () => {
  const used = Object.fromEntries(getHeapSpaceStatistics().map((sp) => [sp.space_name, sp.space_used_size]));
  return (used.old_space ?? 0) + (used.large_object_space ?? 0) + (used.code_space ?? 0) + process.memoryUsage().arrayBuffers;
};
if (file) {
  const timer = setInterval(() => {
    const m = process.memoryUsage();
    const spaces = Object.fromEntries(getHeapSpaceStatistics().map((sp) => [sp.space_name, sp.space_size]));
    write({ rss: m.rss, heapTotal: m.heapTotal, heapUsed: m.heapUsed, external: m.external, arrayBuffers: m.arrayBuffers, newSpace: spaces.new_space ?? 0, oldSpace: spaces.old_space ?? 0 });
  }, 1000);
  timer.unref();
  // The soak's own collections, [from, to] in performance.now() time: not reported again below.
  const askedSpans = [];
  new PerformanceObserver((list) => {
    const major = list.getEntries().filter((e) => e.detail?.kind === constants.NODE_PERFORMANCE_GC_MAJOR);
    if (major.some((e) => !askedSpans.some(([from, to]) => e.startTime >= from && e.startTime <= to))) write({ retained: kept(), asked: false });
  }).observe({ entryTypes: ['gc'] });
  // The soak asks for a full collection at the two points it compares: SIGUSR2 to the process
  // (node runs with --expose-gc there), passed on to the workers. Two in a row: the second
  // finishes giving back the array buffers the first found dead, so the line written then counts
  // only what is alive.
  if (typeof globalThis.gc === 'function') {
    const collect = () => {
      const from = performance.now();
      globalThis.gc();
      globalThis.gc();
      askedSpans.push([from, performance.now()]);
      write({ retained: kept(), asked: true });
    };
    const channel = new BroadcastChannel('qband-soak-collect');
    channel.unref();
    if (isMainThread) {
      process.on('SIGUSR2', () => {
        channel.postMessage('collect');
        collect();
      });
    } else {
      channel.onmessage = collect;
    }
  }
}
