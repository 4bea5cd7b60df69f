// Preloaded into the soak's agent (`node --import bench/soakMemory.mjs bin/qband.mjs run ...`):
// once a second it appends the process's own view of its memory to the file named by
// QBAND_SOAK_MEMORY_FILE, one JSON line (bytes): process.memoryUsage() and the sizes of V8's
// young and old generations. Plain JavaScript so any build of qband can be measured with it.
import { appendFileSync } from 'node:fs';
import { getHeapSpaceStatistics } from 'node:v8';

const file = process.env.QBAND_SOAK_MEMORY_FILE;
if (file) {
  const timer = setInterval(() => {
    const m = process.memoryUsage();
    const spaces = Object.fromEntries(getHeapSpaceStatistics().map((s) => [s.space_name, s.space_size]));
    const line = { t: Date.now(), rss: m.rss, heapTotal: m.heapTotal, heapUsed: m.heapUsed, external: m.external, arrayBuffers: m.arrayBuffers, newSpace: spaces.new_space ?? 0, oldSpace: spaces.old_space ?? 0 };
    try {
      appendFileSync(file, `${JSON.stringify(line)}\n`);
    } catch {
      // The bench went away; nothing to report to.
    }
  }, 1000);
  timer.unref();
}
