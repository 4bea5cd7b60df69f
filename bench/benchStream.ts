/**
 * The data stream of the live bench, shared by the publisher process and the bench process so
 * both see exactly the same blocks: a synthetic accelerometer signal (sines on shaft orders plus
 * noise, as in spectrumBench.ts), cut into 0.1 s binary v1 sample blocks, speed records, the
 * asset map of C sensors, and the speed schedule of a run.
 *
 * Blocks come from a small pool (2 s of signal): channel c at period k carries pool block
 * (k + 13 c) mod 20, so neighbouring channels differ and no process holds C x D seconds of data.
 */
import { encodeSampleBlockBinary } from '../src/acquisition/samplePayload.ts';
import { SeededRandom } from '../src/simulation/prng.ts';

export const FS_HZ = 25_600;
export const BLOCK_SAMPLES = 2560;
export const BLOCK_S = BLOCK_SAMPLES / FS_HZ; // 0.1
export const ASSET_ID = 'bench-pump';
/** Shaft speed of the signal and of the "in band" speed records: 24.7 Hz. */
export const SHAFT_HZ = 24.7;
export const IN_BAND_RPM = SHAFT_HZ * 60; // 1482
/** 1X at 1300 rpm is 21.7 Hz: below the frame mode's band (23.5..25.9 Hz) and its deadband. */
export const OUT_OF_BAND_RPM = 1300;
/** The spectral bench's orders: 1X, 2X, 3X, vane pass (7), gear mesh (23), bearing tones. */
export const ORDERS = [1, 2, 3, 7, 23, 3.5848, 5.4152, 0.39828];
const POOL_S = 2;
export const POOL_BLOCKS = Math.round(POOL_S / BLOCK_S);
const HEADER_SEQ = 4;
const HEADER_T = 8;

/**
 * The synthetic channel both benchmarks process: the orders above on a 24.7 Hz shaft plus
 * seeded noise (the simulator's generator), the same on every run and in every process.
 */
export function syntheticSignal(samples: number): Float32Array {
  const x = new Float32Array(samples);
  const r = new SeededRandom(7);
  for (let i = 0; i < x.length; i++) {
    const t = i / FS_HZ;
    let v = 0.05 * (r.uniform() - 0.5);
    for (let o = 0; o < ORDERS.length; o++) v += (0.1 / (o + 1)) * Math.sin(2 * Math.PI * ORDERS[o] * SHAFT_HZ * t + o);
    x[i] = v;
  }
  return x;
}

/** POOL_BLOCKS encoded blocks of the synthetic signal (seq and t are patched per use). */
export function blockPool(): Uint8Array[] {
  const x = syntheticSignal(POOL_BLOCKS * BLOCK_SAMPLES);
  const pool: Uint8Array[] = [];
  for (let b = 0; b < POOL_BLOCKS; b++) {
    pool.push(encodeSampleBlockBinary({ tS: 0, sampleRateHz: FS_HZ, seq: 0, samples: x.subarray(b * BLOCK_SAMPLES, (b + 1) * BLOCK_SAMPLES) }));
  }
  return pool;
}

export function poolIndex(period: number, channel: number): number {
  return (period + 13 * channel) % POOL_BLOCKS;
}

/** Writes seq and t into an encoded block in place (the header layout of docs/payloads.md). */
export function stampBlock(block: Uint8Array, seq: number, tS: number): Uint8Array {
  const view = new DataView(block.buffer, block.byteOffset, block.byteLength);
  view.setUint32(HEADER_SEQ, seq, true);
  view.setFloat64(HEADER_T, tS, true);
  return block;
}

/** Event time of the first sample of an encoded block. */
export function blockTimeS(payload: Uint8Array): number {
  return new DataView(payload.buffer, payload.byteOffset, payload.byteLength).getFloat64(HEADER_T, true);
}

/** Data time of period k's first sample, as a gateway stamps it: start + seq x block length. */
export function periodStartS(t0S: number, period: number): number {
  return t0S + period * BLOCK_S;
}

/** Speed record of period k, stamped at the end of its data (when a speed reader would send it). */
export function speedPayload(tS: number, rpm: number): string {
  return JSON.stringify({ t: tS, rpm });
}

export function sensorId(channel: number): string {
  return `s${String(channel).padStart(4, '0')}`;
}

export interface BenchTopics {
  samples: string[];
  speed: string;
  alarm: string;
  state: string;
}

export function benchTopics(prefix: string, channels: number): BenchTopics {
  const base = `${prefix}/${ASSET_ID}`;
  return {
    samples: Array.from({ length: channels }, (_, c) => `${base}/samples/${sensorId(c)}`),
    speed: `${base}/speed`,
    alarm: `${base}/alarm`,
    state: `${base}/state`,
  };
}

/**
 * One asset with C sensors (each on its own default topic), speed records on a topic, a frame
 * mode whose 1X band holds IN_BAND_RPM, and the spectral bench's analysis settings written out
 * (8192-point frames, 50 % overlap, 4 averages, no decimation) so the figures compare.
 */
export function benchMapText(opts: { prefix: string; brokerUrl: string; channels: number; onDelayS: number; offDelayS: number }): string {
  const { prefix, brokerUrl, channels } = opts;
  const sensors = Array.from({ length: channels }, (_, c) => `      - { id: ${sensorId(c)}, channel: ${c}, units: g }`).join('\n');
  const orders = ORDERS.map((m, i) => `      - { id: o${i}, multiple: ${m} }`).join('\n');
  return `# Asset map of the live bench (generated).
site: qbench
broker: { url: "${brokerUrl}", topic_prefix: ${prefix} }
agent: { state_every_s: 1, stale_after_s: 5 }
assets:
  - id: ${ASSET_ID}
    procedure: "Bench only: synthetic data"
    speed: { source: topic, topic: ${prefix}/${ASSET_ID}/speed, range_rpm: [600, 1800], max_age_s: 2 }
    orders:
${orders}
    sensors:
${sensors}
    components:
      - { id: frame-mode, fn_hz: ${SHAFT_HZ}, q: 10, orders: [o0] }
    alarm: { on_delay_s: ${opts.onDelayS}, off_delay_s: ${opts.offDelayS}, deadband_pct: 1, priority: high }
    analysis: { frame_size: 8192, overlap: 0.5, averages: 4, decimation: 1 }
`;
}

/** Speed of a run: constant, or out of band for `leadS`, then `cycles` x (in for inS, out for outS). */
export type SpeedSchedule =
  | { kind: 'constant'; rpm: number }
  | { kind: 'cycles'; leadS: number; inS: number; outS: number; cycles: number };

export function scheduleRpm(s: SpeedSchedule, relS: number): number {
  if (s.kind === 'constant') return s.rpm;
  if (relS < s.leadS) return OUT_OF_BAND_RPM;
  const inCycle = (relS - s.leadS) % (s.inS + s.outS);
  return inCycle < s.inS ? IN_BAND_RPM : OUT_OF_BAND_RPM;
}

export function scheduleS(s: SpeedSchedule): number | null {
  return s.kind === 'constant' ? null : s.leadS + s.cycles * (s.inS + s.outS);
}
