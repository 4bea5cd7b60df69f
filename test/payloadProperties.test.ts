import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { BlockSequencer } from '../src/acquisition/blockSequencer.ts';
import {
  decodeSampleBlock,
  encodeSampleBlockBinary,
  encodeSampleBlockJson,
  type SampleBlock,
} from '../src/acquisition/samplePayload.ts';

// Properties of the input layer over generated payloads and streams. The oracles are the rules
// of docs/payloads.md, restated here independently of the code; fast-check prints the shrunk
// counter-example (the input) with the failed expectation. Case counts are the numRuns below:
// 3000 + 2000 + 1500 + 2000 + 1000 + 500 + 1500 + 1000 + 600 = 13 100 cases.

const MAX = 64;
const limits = { maxSamples: MAX };
const enc = new TextEncoder();

/** What every accepted block must satisfy (docs/payloads.md, "Sample blocks"). */
function checkAccepted(payload: Uint8Array): void {
  const r = decodeSampleBlock(payload, limits);
  if (!r.ok) {
    expect(typeof r.detail).toBe('string');
    return;
  }
  const b = r.block;
  expect(Number.isFinite(b.tS), `t ${b.tS}`).toBe(true);
  expect(Number.isFinite(b.sampleRateHz) && b.sampleRateHz > 0, `fs ${b.sampleRateHz}`).toBe(true);
  expect(Number.isSafeInteger(b.seq) && b.seq >= 0, `seq ${b.seq}`).toBe(true);
  expect(b.samples.length >= 1 && b.samples.length <= MAX, `count ${b.samples.length}`).toBe(true);
  expect(b.samples.every(Number.isFinite), 'all samples finite').toBe(true);
}

const validBlock: fc.Arbitrary<SampleBlock> = fc.record({
  tS: fc.double({ noNaN: true, noDefaultInfinity: true }),
  sampleRateHz: fc.double({ min: 1, max: 1e6, noNaN: true }),
  seq: fc.nat({ max: 0xffff_ffff }),
  samples: fc.array(fc.float({ noNaN: true, noDefaultInfinity: true }), { minLength: 1, maxLength: MAX }).map((a) => Float32Array.from(a)),
});

function sameBlock(a: SampleBlock, b: SampleBlock): boolean {
  return (
    Object.is(a.tS, b.tS) &&
    Object.is(a.sampleRateHz, b.sampleRateHz) &&
    a.seq === b.seq &&
    a.samples.length === b.samples.length &&
    a.samples.every((x, i) => Object.is(x, b.samples[i]))
  );
}

describe('decodeSampleBlock properties', () => {
  it('arbitrary bytes, plain or behind the binary magic: never throws, accepts only sound blocks', () => {
    const bytes = fc.oneof(
      fc.uint8Array({ maxLength: 300 }),
      fc.uint8Array({ maxLength: 300 }).map((u) => Uint8Array.from([0x71, 0x62, 1, 1, ...u])),
    );
    fc.assert(fc.property(bytes, checkAccepted), { numRuns: 3000 });
  });

  it('arbitrary JSON values: never throws, accepts only sound blocks', () => {
    fc.assert(
      fc.property(fc.jsonValue({ maxDepth: 3 }), (v) => checkAccepted(enc.encode(JSON.stringify(v)))),
      { numRuns: 2000 },
    );
  });

  it('JSON blocks with the four keys and doubtful values: accepted exactly when the rules say so', () => {
    // number texts that parse to Infinity (1e400), overflow binary32 (1e39), sit at its edge or
    // are not numbers at all
    const numberText = fc.oneof(
      fc.double({ noNaN: true, noDefaultInfinity: true }).map((x) => JSON.stringify(x)),
      fc.integer({ min: -3, max: 3 }).map(String),
      fc.constantFrom('1e400', '-1e400', '1e39', '-3.5e38', '3.4028234663852886e38', '-0', '1.5', '9007199254740992', '0'),
      fc.constantFrom('null', '"1"', 'true', '[]', '{}'),
    );
    const samplesText = fc.oneof(
      fc.array(numberText, { maxLength: MAX + 2 }).map((a) => `[${a.join(',')}]`),
      numberText,
    );
    const gen = fc.record({ t: numberText, fs: numberText, seq: numberText, samples: samplesText });
    fc.assert(
      fc.property(gen, (f) => {
        const text = `{"t":${f.t},"fs":${f.fs},"seq":${f.seq},"samples":${f.samples}}`;
        const parsed = JSON.parse(text) as Record<string, unknown>;
        const num = (v: unknown) => typeof v === 'number' && Number.isFinite(v);
        const s = parsed.samples;
        const expectOk =
          num(parsed.t) &&
          num(parsed.fs) &&
          (parsed.fs as number) >= 1 &&
          (parsed.fs as number) <= 1e6 &&
          Number.isSafeInteger(parsed.seq) &&
          (parsed.seq as number) >= 0 &&
          Array.isArray(s) &&
          s.length >= 1 &&
          s.length <= MAX &&
          s.every((x) => typeof x === 'number' && Number.isFinite(Math.fround(x)));
        const r = decodeSampleBlock(enc.encode(text), limits);
        expect(r.ok, `${text} -> ${r.ok ? 'ok' : `${r.reason}: ${r.detail}`}`).toBe(expectOk);
        if (r.ok) {
          expect(r.block.tS).toBe(parsed.t);
          expect(Array.from(r.block.samples)).toEqual((s as number[]).map(Math.fround));
        }
      }),
      { numRuns: 1500 },
    );
  });

  it('mutated binary blocks: never throws, and whatever is accepted re-encodes to the very same bytes', () => {
    const mutation = fc.oneof(
      fc.record({ kind: fc.constant('flip' as const), at: fc.nat(), xor: fc.integer({ min: 1, max: 255 }) }),
      fc.record({ kind: fc.constant('truncate' as const), at: fc.nat() }),
      fc.record({ kind: fc.constant('extend' as const), extra: fc.uint8Array({ minLength: 1, maxLength: 12 }) }),
      fc.record({
        kind: fc.constant('poison' as const),
        at: fc.nat(),
        value: fc.constantFrom(Number.NaN, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY),
      }),
      fc.record({ kind: fc.constant('count' as const), count: fc.oneof(fc.nat({ max: MAX + 4 }), fc.constant(0xffff_ffff), fc.nat()) }),
      fc.record({ kind: fc.constant('header' as const), field: fc.constantFrom(8, 16), value: fc.constantFrom(Number.NaN, Number.POSITIVE_INFINITY, 0, -1) }),
    );
    fc.assert(
      fc.property(validBlock, fc.array(mutation, { minLength: 1, maxLength: 3 }), fc.nat({ max: 3 }), (block, mutations, byteOffset) => {
        let bytes: Uint8Array = encodeSampleBlockBinary(block);
        for (const m of mutations) {
          const view = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
          if (m.kind === 'flip' && bytes.length > 0) bytes[m.at % bytes.length] ^= m.xor;
          else if (m.kind === 'truncate') bytes = bytes.slice(0, m.at % (bytes.length + 1));
          else if (m.kind === 'extend') bytes = Uint8Array.from([...bytes, ...m.extra]);
          else if (m.kind === 'poison' && bytes.length >= 36) {
            const i = m.at % Math.floor((bytes.length - 32) / 4);
            view.setFloat32(32 + 4 * i, m.value, true);
          } else if (m.kind === 'count' && bytes.length >= 28) view.setUint32(24, m.count, true);
          else if (m.kind === 'header' && bytes.length >= 32) view.setFloat64(m.field, m.value, true);
        }
        const placed = new Uint8Array(bytes.length + byteOffset).subarray(byteOffset);
        placed.set(bytes);
        checkAccepted(placed);
        const r = decodeSampleBlock(placed, limits);
        if (r.ok) {
          // an accepted binary block is canonical: nothing in it is ignored
          expect(Array.from(encodeSampleBlockBinary(r.block))).toEqual(Array.from(bytes));
        }
      }),
      { numRuns: 2000 },
    );
  });

  it('valid blocks round-trip exactly through both forms (bit for bit, -0 included)', () => {
    fc.assert(
      fc.property(validBlock, (block) => {
        const viaBinary = decodeSampleBlock(encodeSampleBlockBinary(block), limits);
        const viaJson = decodeSampleBlock(enc.encode(encodeSampleBlockJson(block)), limits);
        expect(viaBinary.ok && sameBlock(viaBinary.block, block)).toBe(true);
        expect(viaJson.ok && sameBlock(viaJson.block, block), encodeSampleBlockJson(block)).toBe(true);
      }),
      { numRuns: 1000 },
    );
  });

  it('JSON writes each sample as the shortest decimal that reads back (against a digit-by-digit search)', () => {
    // reference: the first of toPrecision(1..9) that reads back through binary32 rounding; 9
    // significant digits always suffice for binary32 (IEEE 754-2008, 5.12.2)
    const shortest = (v: number) => {
      if (Object.is(v, -0)) return '-0';
      for (let d = 1; d <= 9; d++) {
        const t = v.toPrecision(d);
        if (Math.fround(Number(t)) === v) return String(Number(t));
      }
      throw new Error(`no text for ${v}`);
    };
    const samples = fc.array(fc.float({ noNaN: true, noDefaultInfinity: true }), { minLength: 1, maxLength: MAX }).map((a) => Float32Array.from(a));
    fc.assert(
      fc.property(samples, (arr) => {
        const json = encodeSampleBlockJson({ tS: 0, sampleRateHz: 1, seq: 0, samples: arr });
        const list = /"samples":\[(.*)\]\}$/.exec(json)![1].split(',');
        expect(list).toEqual(Array.from(arr, shortest));
      }),
      { numRuns: 500 },
    );
  });
});

// ---- sequencer ----------------------------------------------------------------------------

interface Watch {
  delivered: Set<SampleBlock>;
  events: number;
  prev: SampleBlock | null;
}

/** Feeds one output through the invariants of docs/payloads.md ("Putting blocks in order"). */
function watchOutput(w: Watch, out: ReturnType<BlockSequencer['accept']>): void {
  for (const d of out.deliver) {
    expect(w.delivered.has(d.block), `block seq ${d.block.seq} delivered twice`).toBe(false);
    w.delivered.add(d.block);
    if (!d.resetBefore && w.prev !== null) {
      const p = w.prev;
      expect(d.block.seq, 'consecutive seq between resets').toBe(p.seq + 1);
      expect(d.block.sampleRateHz, 'same rate between resets').toBe(p.sampleRateHz);
      const endS = p.tS + p.samples.length / p.sampleRateHz;
      expect(Math.abs(d.block.tS - endS) <= 0.5 / p.sampleRateHz + 4 * Number.EPSILON * Math.abs(endS), 'continuous time between resets').toBe(true);
    }
    if (d.resetBefore) expect(['gap', 'rate_change', 'time_jump', 'sender_restart']).toContain(d.reason);
    w.prev = d.block;
  }
  w.events += out.deliver.length + out.dropped.length;
}

const newWatch = (): Watch => ({ delivered: new Set(), events: 0, prev: null });

describe('BlockSequencer properties', () => {
  it('arbitrary streams: never throws, never delivers twice, consecutive between resets, bounded, accounts for every block', () => {
    const step = fc.oneof(
      { weight: 12, arbitrary: fc.record({ seq: fc.nat({ max: 24 }), tIndex: fc.nat({ max: 24 }), jitter: fc.constantFrom(0, 0, 0, 0.1, -0.2, 3), fs: fc.constantFrom(4, 4, 4, 8), n: fc.integer({ min: 1, max: 4 }) }) },
      { weight: 1, arbitrary: fc.constant('flush' as const) },
    );
    fc.assert(
      fc.property(fc.nat({ max: 5 }), fc.array(step, { maxLength: 40 }), (reorderWindow, steps) => {
        const s = new BlockSequencer({ reorderWindow });
        const w = newWatch();
        let accepted = 0;
        for (const st of steps) {
          if (st === 'flush') {
            watchOutput(w, s.flush());
            expect(s.heldCount).toBe(0);
          } else {
            accepted++;
            // 4 samples at 4 Hz: block k starts near k seconds
            watchOutput(w, s.accept({ seq: st.seq, tS: st.tIndex + st.jitter, sampleRateHz: st.fs, samples: new Float32Array(st.n) }));
          }
          expect(s.heldCount).toBeLessThanOrEqual(reorderWindow);
          const c = s.counts;
          expect(c.received).toBe(c.delivered + c.duplicate + c.late + s.heldCount);
        }
        watchOutput(w, s.flush());
        expect(w.events, 'each accepted block is delivered or dropped exactly once').toBe(accepted);
      }),
      { numRuns: 1500 },
    );
  });

  it('reordering within the window and duplicates lose nothing: all delivered once, in order, no reset', () => {
    const gen = fc
      .record({ reorderWindow: fc.integer({ min: 1, max: 6 }), n: fc.integer({ min: 1, max: 40 }) })
      .chain(({ reorderWindow, n }) =>
        fc.record({
          reorderWindow: fc.constant(reorderWindow),
          // displacement of each block, at most the window; block 0 first (the first block is taken as is)
          delays: fc.array(fc.nat({ max: reorderWindow }), { minLength: n, maxLength: n }).map((d) => [0, ...d.slice(1)]),
          copies: fc.array(fc.record({ of: fc.nat({ max: n - 1 }), after: fc.nat({ max: 10 }) }), { maxLength: 8 }),
        }),
      );
    fc.assert(
      fc.property(gen, ({ reorderWindow, delays, copies }) => {
        const n = delays.length;
        const blocks = delays.map((_, k) => ({ seq: 1000 + k, tS: 5000 + k * 0.25, sampleRateHz: 16, samples: new Float32Array(4) }));
        // arrival order: by k + delay, ties by k; with delay <= window at most window - 1 wait
        let order: SampleBlock[] = blocks
          .map((b, k) => ({ b, key: k + delays[k], k }))
          .sort((x, y) => x.key - y.key || x.k - y.k)
          .map((x) => x.b);
        for (const c of copies) {
          const at = order.indexOf(blocks[c.of]);
          const copy = { ...blocks[c.of] };
          order = [...order.slice(0, at + 1 + c.after), copy, ...order.slice(at + 1 + c.after)];
        }
        const s = new BlockSequencer({ reorderWindow });
        const seqs: number[] = [];
        const drops: string[] = [];
        for (const b of order) {
          const out = s.accept(b);
          for (const d of out.deliver) {
            expect(d.resetBefore, `reset ${d.reason} before seq ${d.block.seq}`).toBe(false);
            seqs.push(d.block.seq);
          }
          for (const x of out.dropped) drops.push(x.reason);
        }
        expect(s.heldCount).toBe(0);
        expect(seqs).toEqual(blocks.map((b) => b.seq));
        expect(drops).toEqual(copies.map(() => 'duplicate'));
        expect(n).toBe(seqs.length);
      }),
      { numRuns: 1000 },
    );
  });

  it('lost blocks in order: every kept block delivered once, a gap reset exactly after each loss', () => {
    const gen = fc.record({
      reorderWindow: fc.nat({ max: 5 }),
      kept: fc.array(fc.boolean(), { minLength: 1, maxLength: 40 }),
    });
    fc.assert(
      fc.property(gen, ({ reorderWindow, kept }) => {
        const s = new BlockSequencer({ reorderWindow });
        const got: string[] = [];
        const record = (out: ReturnType<BlockSequencer['accept']>) => {
          for (const d of out.deliver) got.push(`${d.block.seq}${d.resetBefore ? ` ${d.reason}` : ''}`);
          expect(out.dropped).toEqual([]);
        };
        kept.forEach((keep, k) => {
          if (keep) record(s.accept({ seq: k, tS: k, sampleRateHz: 2, samples: new Float32Array(2) }));
        });
        record(s.flush());
        // oracle: kept blocks in order; the first kept is taken as is; any other kept block
        // whose predecessor was lost comes with a gap reset; missing counts the lost between
        const keptSeqs = kept.flatMap((keep, k) => (keep ? [k] : []));
        const expected = keptSeqs.map((k, i) => (i > 0 && !kept[k - 1] ? `${k} gap` : `${k}`));
        expect(got).toEqual(expected);
        const lostBetween = keptSeqs.length === 0 ? 0 : keptSeqs[keptSeqs.length - 1] - keptSeqs[0] + 1 - keptSeqs.length;
        expect(s.counts.missing).toBe(lostBetween);
      }),
      { numRuns: 600 },
    );
  });
});
