/**
 * Section 4 of the live bench: alarm latency. A few channels at real-time pace, the speed
 * stepped into the band and out again; the wall time from publishing the block that completes
 * the on-delay to a subscriber receiving the raise.
 */
import { BLOCK_S, BLOCK_SAMPLES, FS_HZ, periodStartS, scheduleS, type SpeedSchedule } from './benchStream.ts';
import { f } from './liveReport.ts';
import { median } from './liveRig.ts';
import { liveRun, type Bench } from './liveRun.ts';

/** Runs the latency section and prints it; returns the latencies (ms) of the raises received. */
export async function alarmLatency(b: Bench, channels: number, steps: number): Promise<number[]> {
  const cycles: SpeedSchedule = { kind: 'cycles', leadS: 1.2, inS: b.settings.onDelayS + 0.4, outS: b.settings.offDelayS + 0.4, cycles: steps };
  const latPeriods = Math.round((scheduleS(cycles) as number) / BLOCK_S);
  const lat = await liveRun(b, { channels, periods: latPeriods, mode: 'paced', schedule: cycles, segmentPeriods: 10, recordTimes: true, profile: false });
  const raises = lat.alarms.filter((a) => a.event === 'raise');
  const latencies: number[] = [];
  const fromLast: number[] = [];
  let waitedNext = 0;
  /** Raises whose completing block ends short of the decision time in double arithmetic. */
  const shortS: number[] = [];
  const lastPublishBefore = (ms: number): number => {
    let best = -Infinity;
    for (const t of lat.times.values()) for (const p of [t.speedMs, ...t.blockMs]) if (p <= ms && p > best) best = p;
    return best;
  };
  for (const a of raises) {
    // The block that completes the on-delay: the first period whose data reaches t_s (1 us
    // allowance for the rounding of t_s in the record); its last channel's block goes last.
    let k = 0;
    while (k < latPeriods && periodStartS(lat.t0S, k + 1) < a.tS - 1e-6) k++;
    const t = lat.times.get(k);
    if (!t) continue;
    latencies.push(a.receivedMs - Math.max(t.speedMs, ...t.blockMs));
    fromLast.push(a.receivedMs - lastPublishBefore(a.receivedMs));
    // The engine decides at start + n x step; the block's end is its stamp + count / fs.
    const n = Math.round((a.tS - lat.t0S) / BLOCK_S);
    const decisionS = lat.t0S + n * BLOCK_S;
    const blockEndS = periodStartS(lat.t0S, n - 1) + BLOCK_SAMPLES / FS_HZ;
    if (decisionS - blockEndS > 1e-9) shortS.push(decisionS - blockEndS);
    const next = lat.times.get(k + 1);
    if (next && a.receivedMs > Math.max(next.speedMs, ...next.blockMs)) waitedNext++;
  }
  console.log(
    `\n4. alarm latency: ${channels} channels at real-time pace, on-delay ${b.settings.onDelayS} s, speed stepped into the band and out ${steps} times.\n` +
      `   Wall time from publishing the last block whose data reaches the raise's t_s to a subscriber receiving the raise.`,
  );
  console.log(
    `   raises received ${raises.length} of ${steps}: median ${f(median(latencies), 1, 0)} ms, max ${f(Math.max(...latencies), 1, 0)} ms` +
      (lat.problems.length ? `; problems: ${lat.problems.join('; ')}` : ''),
  );
  if (waitedNext > 0) {
    console.log(
      `   ${waitedNext} of ${raises.length} raises came only after the NEXT period's blocks were published: the decision at t_s waited one\n` +
        `   more block. From the last publication before each raise to its receipt: median ${f(median(fromLast), 1, 0)} ms, max ${f(Math.max(...fromLast), 1, 0)} ms.`,
    );
    if (shortS.length > 0) {
      console.log(
        `   In ${shortS.length} of the raises the completing block's end (epoch stamp + count / fs) falls ${median(shortS).toExponential(1)} s (one double\n` +
          `   rounding step at ${lat.t0S.toExponential(1)} s) short of the decision time start + n x step, beyond the 1e-9 s the engine allows.`,
      );
    }
  }
  return latencies;
}
