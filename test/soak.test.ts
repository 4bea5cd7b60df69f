import { describe, expect, it } from 'vitest';
import { keptAliveText, runSoak } from '../bench/soak.ts';

// Bounded resources: `qband run` fed many 25.6 kHz channels in real time through a real broker
// (loopback only). Memory must stay flat after warm-up and nothing may be lost that the
// overload rule did not shed. The suite runs 30 s; CI runs it longer with QBAND_SOAK_S (and
// `npm run soak` reports the figures for any length).
const SECONDS = Number(process.env.QBAND_SOAK_S ?? 30);
const CHANNELS = Number(process.env.QBAND_SOAK_CHANNELS ?? 16);

describe('soak: many channels in real time', () => {
  it(`keeps memory flat and loses nothing over ${SECONDS} s of ${CHANNELS} channels`, async () => {
    const r = await runSoak({ channels: CHANNELS, seconds: SECONDS, brokerUrl: process.env.QBAND_TEST_BROKER, sampleEveryS: Math.max(5, SECONDS / 10), keptAlive: true });
    console.info(`soak: ${CHANNELS} channels, ${SECONDS} s via ${r.broker}: RSS ${r.rssMiB.map((x) => `${x.atS}s=${x.rssMiB}`).join(' ')} MiB; growth over the second half x${r.rssGrowth.toFixed(3)}`);
    expect(r.agentExit).toBe(0);
    // Flat: the last sample within 10 % of the highest between the warm-up mark and the middle
    // of the run (allocator and GC noise on a steady load stay well inside that). Keeping every
    // block would add 102 kB/s per channel: over the suite's second half (15 s, 16 channels)
    // about 25 MB on some 130, x1.19.
    expect(r.rssGrowth).toBeLessThan(1.1);
    // What the agent keeps alive after full collections, at the last block over the
    // middle (both asked for by the soak, under load): garbage does not count, so this sees
    // leaks that the resident memory's swings hide. Measured with this test: an agent made to
    // keep one block in four (25.6 kB/s per channel, about 6 MB over the second half on some
    // 22 MB kept) gave x1.21 while its resident memory read x0.86; clean runs 0.99 to 1.01.
    console.info(`soak: kept alive after full collections ${keptAliveText(r.retainedMiB)}; x${r.retainedGrowth?.toFixed(3)}`);
    expect(r.retainedGrowth).not.toBeNull();
    expect(r.retainedGrowth as number).toBeLessThan(1.1);
    const drops = Object.entries(r.counters).filter(([k, v]) => k.startsWith('drop_') && v > 0);
    expect(drops).toEqual([]);
    const shed = r.counters.overload_shed_blocks ?? 0;
    // Everything published was received and delivered; only the overload rule may skip spectra.
    expect(r.counters.blocks_received).toBe(r.blocksPublished);
    expect(r.counters.seq_missing ?? 0).toBe(0);
    expect(shed).toBe(0);
  }, (SECONDS + 60) * 1000);
});
