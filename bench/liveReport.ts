/** The live bench's tables: rates per segment, the flat-out row, number formatting. */
import { BLOCK_S } from './benchStream.ts';
import { median } from './liveRig.ts';
import type { Segment } from './liveRun.ts';

/** Channel-seconds of data per segment, at least this many. */
export const SEGMENT_CHANNEL_S = 64;

/** Channels per core of each segment: channel-seconds of data over CPU seconds. */
export function rates(segments: Segment[], channels: number, segmentPeriods: number): number[] {
  const chS = channels * segmentPeriods * BLOCK_S;
  return segments.map((s) => chS / s.cpuS);
}

/** Least-squares slope of y against x. */
export function slope(x: number[], y: number[]): number {
  const mx = x.reduce((a, v) => a + v, 0) / x.length;
  const my = y.reduce((a, v) => a + v, 0) / y.length;
  let num = 0;
  let den = 0;
  for (let i = 0; i < x.length; i++) {
    num += (x[i] - mx) * (y[i] - my);
    den += (x[i] - mx) ** 2;
  }
  return den > 0 ? num / den : 0;
}

export const sum = (a: number[]): number => a.reduce((x, v) => x + v, 0);
export const f = (v: number | null | undefined, d = 0, w = 8): string => (v === null || v === undefined || !Number.isFinite(v) ? '-' : v.toFixed(d)).padStart(w);

/** Periods per segment: at least SEGMENT_CHANNEL_S channel-seconds, in whole half seconds. */
export function segmentPeriodsFor(channels: number): number {
  return Math.max(5, Math.ceil(SEGMENT_CHANNEL_S / BLOCK_S / channels / 5) * 5);
}

export interface FlatRow {
  c: number;
  /** Data per channel over all rounds, s. */
  dataS: number;
  live: number[];
  runtime: number[];
  engine: number[];
  /** The bare receiver (liveRun's `receiver: 'mqtt'`): channels per core of receiving alone. */
  receive: number[];
  /** live / engine of each round (medians of its segments). */
  ratios: number[];
  /** Measured live segments of every round. */
  segments: Segment[];
  publisher: { cpuS: number; wallS: number };
  machineCores: number[];
  problems: string[];
  complete: boolean;
}

export function wallChannels(r: FlatRow): number {
  const segP = segmentPeriodsFor(r.c);
  return r.complete ? (r.c * r.segments.length * segP * BLOCK_S) / sum(r.segments.map((s) => s.wallS)) : Number.NaN;
}

export function printFlat(r: FlatRow): void {
  const live = median(r.live);
  const engine = median(r.engine);
  const cpu = sum(r.segments.map((s) => s.cpuS));
  const ratios = `${f(live / engine, 2, 4)} (${Math.min(...r.ratios).toFixed(2)}-${Math.max(...r.ratios).toFixed(2)})`;
  console.log(
    `  ${f(r.c, 0, 5)} ${f(r.dataS, 0, 6)} ${f(live)} ${f(median(r.runtime))} ${f(engine)} ${f(median(r.receive))}  ${ratios.padEnd(16)} ${f(wallChannels(r), 0, 6)} ` +
      `${f(cpu / sum(r.segments.map((s) => s.wallS)), 2, 6)} ${f((100 * sum(r.segments.map((s) => s.handlerS))) / cpu, 0, 6)} % ` +
      `${f(r.publisher.cpuS / r.publisher.wallS, 2, 8)} ${f(median(r.machineCores), 2, 8)}   ${r.problems.length === 0 ? 'none' : r.problems.join('; ')}`,
  );
}

/**
 * What the bare receiver measured, and what it does not say. The publisher cannot keep a client
 * that does nothing busy, so that client waits between messages and pays a socket wake-up for
 * nearly every block, where the busy agent reads many blocks per wake-up: its cost per block is
 * an upper bound on receiving, not a floor under the live figure.
 */
export function printReceive(r: FlatRow): void {
  const us = (chPerCore: number): number => 1e6 / chPerCore;
  const [uLive, uEngine, uReceive] = [us(median(r.live)), us(median(r.engine)), us(median(r.receive))];
  console.log(
    `\n   receiving alone (an MQTT client connected and tuned as the agent's, acknowledging each block and doing nothing\n` +
      `   else): ${uReceive.toFixed(0)} us of CPU per channel-second at C = ${r.c}, ${(uReceive * BLOCK_S).toFixed(1)} us per ${BLOCK_S} s block, at the rate the\n` +
      `   publisher manages: that client idles between blocks and wakes for nearly each one, so this bounds receiving from\n` +
      `   above. The live agent's whole overhead over the engine (receiving, decoding, sequencing, publishing):\n` +
      `   ${(uLive - uEngine).toFixed(0)} us per channel-second, ${((uLive - uEngine) * BLOCK_S).toFixed(1)} us per block.`,
  );
}

/** A V8 sampling profile's parts and busiest functions, in us per channel-second at `usPerChS`. */
export function printProfile(profile: { parts: Array<{ part: string; share: number }>; functions: Array<{ name: string; part: string; share: number }> }, usPerChS: number): void {
  for (const p of profile.parts) if (p.share >= 0.005) console.log(`      ${p.part.padEnd(45)} ${f(100 * p.share, 1, 5)} %  ${f(usPerChS * p.share, 0, 5)} us/ch-s`);
  console.log('   functions with the most self time:');
  for (const p of profile.functions.slice(0, 8)) console.log(`      ${p.name.slice(0, 60).padEnd(60)} ${f(100 * p.share, 1, 5)} %  (${p.part})`);
}
