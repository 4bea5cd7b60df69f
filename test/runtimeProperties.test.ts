import { readFileSync } from 'node:fs';
import fc from 'fast-check';
import { beforeAll, describe, expect, it } from 'vitest';
import { AssetRuntime, type Outbound } from '../src/agent/assetRuntime.ts';
import { encodeSampleBlockBinary, encodeSampleBlockJson } from '../src/acquisition/samplePayload.ts';
import { DEFAULT_AGENT, parseAssetMap } from '../src/config/parseAssetMap.ts';
import type { AssetConfig } from '../src/config/types.ts';
import { createRealFft, type RealFft } from '../src/manipulation/realFft.ts';

// Property-based: whatever arrives on the agent's topics, in whatever order and shape, the
// runtime (decoders, sequencer, engine, operator commands) throws nothing and publishes no
// record with a non-number where a number belongs. JSON turns NaN and Infinity into null, so
// a null is accepted only in the fields that are documented as nullable (docs/topics.md).
const NULLABLE = new Set([
  'speed_rpm', 'order_hz', 'amplitude', 'outside_band', 'ratio_to_outside', 'reason', 'nearest_component',
  'separation_pct', 'data_age_s', 'shelved_until', 'duration_s', 'cause', 'by', 'priority', 'speed_source', 'config_error',
]);

function checkRecord(value: unknown, path: string, problems: string[]): void {
  if (value === null) {
    const key = path.split('.').at(-1)!.replace(/\[\d+\]$/, '');
    if (!NULLABLE.has(key)) problems.push(`${path} is null`);
    return;
  }
  if (typeof value === 'number' && !Number.isFinite(value)) problems.push(`${path} is ${value}`);
  if (Array.isArray(value)) value.forEach((v, i) => checkRecord(v, `${path}[${i}]`, problems));
  else if (typeof value === 'object') for (const [k, v] of Object.entries(value as object)) checkRecord(v, `${path}.${k}`, problems);
}

let asset: AssetConfig;
let fft: RealFft;
const PREFIX = 'qband';
const SENSOR = `${PREFIX}/cw-pump-2/samples/motor-top-x`;
const TACH = `${PREFIX}/cw-pump-2/samples/tach`;
const COMMAND = `${PREFIX}/cw-pump-2/command`;

beforeAll(async () => {
  let text = readFileSync(new URL('../config/demo-map.yaml', import.meta.url), 'utf8');
  text = text.replace('alarm: { on_delay_s: 30, off_delay_s: 10, deadband_pct: 1, priority: high }', 'alarm: { on_delay_s: 0.5, off_delay_s: 0.5, deadband_pct: 1, priority: high }\n    analysis: { frame_size: 256, averages: 2 }');
  asset = parseAssetMap(text, 'demo-map.yaml').map!.assets[0];
  fft = await createRealFft(256);
});

const NOW_MS = 1_790_000_000_000;
const sample = fc.oneof(
  fc.float({ min: -10, max: 10, noNaN: true }),
  fc.constantFrom(0, -0, 5, 3.4e38, -3.4e38, 1e-45, Number.NaN, Number.POSITIVE_INFINITY),
);
const block = fc.record({
  topic: fc.constantFrom(SENSOR, TACH),
  seqStep: fc.integer({ min: -3, max: 6 }),
  tStepS: fc.oneof(fc.constant(null), fc.double({ min: -5, max: 50, noNaN: true })),
  fs: fc.constantFrom(2560, 2560, 2560, 5120, 0.001, 1e7),
  samples: fc.array(sample, { minLength: 0, maxLength: 600 }),
  json: fc.boolean(),
});
const op = fc.oneof(
  { weight: 6, arbitrary: block.map((b) => ({ kind: 'block' as const, ...b })) },
  { weight: 1, arbitrary: fc.uint8Array({ maxLength: 80 }).map((bytes) => ({ kind: 'bytes' as const, topic: SENSOR, bytes })) },
  { weight: 1, arbitrary: fc.jsonValue().map((v) => ({ kind: 'bytes' as const, topic: TACH, bytes: Buffer.from(JSON.stringify(v) ?? '') })) },
  {
    weight: 1,
    arbitrary: fc
      .record({
        action: fc.constantFrom('acknowledge', 'shelve', 'unshelve', 'explode'),
        component: fc.constantFrom('motor-reed', 'discharge-pipe', 'nothing'),
        order: fc.constantFrom('1x', 'vane-pass', '9x'),
        duration_s: fc.oneof(fc.constant(undefined), fc.double({ noNaN: false })),
        // Age at arrival, s: fresh, stale (past agent.max_command_age_s), from the future, or unstamped.
        issued_ago_s: fc.oneof(fc.constant(undefined), fc.constantFrom(0, 5, 1e4, -1e4), fc.double({ noNaN: false })),
      })
      .map(({ issued_ago_s, ...c }) => ({ ...c, ...(issued_ago_s === undefined ? {} : { issued_t_s: NOW_MS / 1000 - issued_ago_s }) }))
      .map((c) => ({ kind: 'bytes' as const, topic: COMMAND, bytes: Buffer.from(JSON.stringify(c)) })),
  },
  { weight: 1, arbitrary: fc.integer({ min: 0, max: 20_000 }).map((ms) => ({ kind: 'tick' as const, ms })) },
);

describe('agent runtime under arbitrary input (fast-check)', () => {
  it('throws nothing, answers every command and stale tick, and publishes only well-formed records', () => {
    // Totals over every run: a runtime that published nothing (or nothing of a kind) must fail.
    const kinds: Record<string, number> = {};
    fc.assert(
      fc.property(fc.array(op, { minLength: 1, maxLength: 25 }), (ops) => {
        const runtime = new AssetRuntime(asset, DEFAULT_AGENT, PREFIX, fft);
        const seq = new Map([[SENSOR, 0], [TACH, 0]]);
        const t = new Map([[SENSOR, NOW_MS / 1000 - 100], [TACH, NOW_MS / 1000 - 100]]);
        let nowMs = NOW_MS;
        const out: Outbound[] = [];
        let lastStateMs: number | null = null;
        for (const o of ops) {
          if (o.kind === 'tick') {
            nowMs += o.ms;
            const ticked = runtime.tick(nowMs).out;
            // docs/topics.md: the state is re-published when nothing refreshed it for stale_after_s
            // (at least once: a tick that lets go of a held reorder buffer also publishes the
            // states of the data it releases).
            if (lastStateMs === null || nowMs - lastStateMs >= DEFAULT_AGENT.staleAfterS * 1000) {
              expect(ticked.filter((m) => m.kind === 'state').length, `tick at +${nowMs - NOW_MS} ms`).toBeGreaterThanOrEqual(1);
            }
            out.push(...ticked);
            for (const m of ticked) if (m.kind === 'state') lastStateMs = nowMs;
            continue;
          }
          if (o.kind === 'bytes') {
            const answered = runtime.onMessage(o.topic, o.bytes, nowMs).out;
            // Every command is answered: refused on command/rejected, or applied with a new state.
            if (o.topic === COMMAND) expect(answered.some((m) => m.kind === 'rejected' || m.kind === 'state'), `command ${Buffer.from(o.bytes).toString()}`).toBe(true);
            for (const m of answered) if (m.kind === 'state') lastStateMs = nowMs;
            out.push(...answered);
            continue;
          }
          const s = Math.max(0, seq.get(o.topic)! + o.seqStep);
          seq.set(o.topic, s + 1);
          const tS = o.tStepS === null ? t.get(o.topic)! : t.get(o.topic)! + o.tStepS;
          t.set(o.topic, tS + o.samples.length / o.fs);
          const b = { tS, sampleRateHz: o.fs, seq: s, samples: Float32Array.from(o.samples) };
          let payload: Uint8Array;
          try {
            payload = o.json ? Buffer.from(encodeSampleBlockJson(b)) : encodeSampleBlockBinary(b);
          } catch {
            // The encoders refuse what the decoder would drop; send the raw JSON form instead.
            payload = Buffer.from(JSON.stringify({ t: tS, fs: o.fs, seq: s, samples: o.samples }));
          }
          const published = runtime.onMessage(o.topic, payload, nowMs).out;
          for (const m of published) if (m.kind === 'state') lastStateMs = nowMs;
          out.push(...published);
        }
        for (const m of out) kinds[m.kind] = (kinds[m.kind] ?? 0) + 1;
        const problems: string[] = [];
        for (const m of out) checkRecord(JSON.parse(m.payload), m.kind, problems);
        expect(problems).toEqual([]);
      }),
      { numRuns: 400 },
    );
    // 400 runs of up to 25 operations with one command in 10 and one tick in 10: states and
    // refusals by the hundred; a check of well-formed records needs records to check.
    expect(kinds.state ?? 0, JSON.stringify(kinds)).toBeGreaterThan(100);
    expect(kinds.rejected ?? 0, JSON.stringify(kinds)).toBeGreaterThan(50);
  });
});
