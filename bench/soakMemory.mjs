// Preloaded into the soak's agent (`node --import bench/soakMemory.mjs bin/qband.mjs run ...`):
// once a second it appends the process's own view of its memory to the file named by
// QBAND_SOAK_MEMORY_FILE, one JSON line (bytes): process.memoryUsage() and the sizes of V8's
// young and old generations. After each full (mark-compact) collection of the agent's thread it
// appends a line with `retained`: what the thread keeps alive (a leak raises it; garbage does
// not), exactly for the collections the soak asks for (`asked`), roughly for V8's own. With
// worker threads the engines' heaps are in the workers and not in it. Plain JavaScript so any
// build of qband can be measured with it.
import { appendFileSync } from 'node:fs';
import { PerformanceObserver, constants, performance } from 'node:perf_hooks';
import { getHeapSpaceStatistics } from 'node:v8';

const file = process.env.QBAND_SOAK_MEMORY_FILE;
const write = (line) => {
  try {
    appendFileSync(file, `${JSON.stringify(line)}\n`);
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
    write({ t: Date.now(), rss: m.rss, heapTotal: m.heapTotal, heapUsed: m.heapUsed, external: m.external, arrayBuffers: m.arrayBuffers, newSpace: spaces.new_space ?? 0, oldSpace: spaces.old_space ?? 0 });
  }, 1000);
  timer.unref();
  // The soak's own collections, [from, to] in performance.now() time: not reported again below.
  const askedSpans = [];
  new PerformanceObserver((list) => {
    const major = list.getEntries().filter((e) => e.detail?.kind === constants.NODE_PERFORMANCE_GC_MAJOR);
    if (major.some((e) => !askedSpans.some(([from, to]) => e.startTime >= from && e.startTime <= to))) write({ t: Date.now(), retained: kept(), asked: false });
  }).observe({ entryTypes: ['gc'] });
  // The soak asks for a full collection at the two points it compares (SIGUSR2; node runs with
  // --expose-gc there). Two in a row: the second finishes giving back the array buffers the
  // first found dead, so the line written then counts only what is alive.
  if (typeof globalThis.gc === 'function') {
    process.on('SIGUSR2', () => {
      const from = performance.now();
      globalThis.gc();
      globalThis.gc();
      askedSpans.push([from, performance.now()]);
      write({ t: Date.now(), retained: kept(), asked: true });
    });
  }
}
