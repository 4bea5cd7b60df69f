import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { QbandError } from '../src/errors.ts';
import {
  DEFAULT_MAX_SAMPLES_PER_BLOCK,
  decodeSampleBlock,
  encodeSampleBlockBinary,
  encodeSampleBlockJson,
  type SampleBlock,
} from '../src/acquisition/samplePayload.ts';
import { DROP_REASONS } from '../src/acquisition/dropReason.ts';

// Every layout fact below comes from the live contract's binary v1 table (repeated in
// docs/payloads.md): offsets 0 magic "qb", 2 version, 3 kind, 4 u32 seq, 8 f64 t, 16 f64 fs,
// 24 u32 count, 28 u32 reserved, 32 f32 samples, all little-endian. Float values follow IEEE 754
// binary32/binary64; Math.fround is the binary32 rounding. Comparisons are exact (tolerance 0):
// decoding copies bits, it computes nothing.

interface Fields {
  magic?: [number, number];
  version?: number;
  kind?: number;
  seq?: number;
  tS?: number;
  fs?: number;
  count?: number;
  reserved?: number;
  samples?: number[];
  /** bytes added (> 0) or cut (< 0) at the end */
  trim?: number;
  /** place the payload at this byte offset inside a larger buffer */
  byteOffset?: number;
}

/** Writes a binary block field by field from the contract table, independent of the encoder. */
function handBuilt(f: Fields = {}): Uint8Array {
  const samples = f.samples ?? [0.5, -1.25];
  const length = 32 + 4 * samples.length + (f.trim ?? 0);
  const offset = f.byteOffset ?? 0;
  const backing = new Uint8Array(offset + Math.max(length, 0) + 3);
  const out = backing.subarray(offset, offset + Math.max(length, 0));
  const full = new DataView(new ArrayBuffer(Math.max(32 + 4 * samples.length, length)));
  const [m0, m1] = f.magic ?? [0x71, 0x62];
  full.setUint8(0, m0);
  full.setUint8(1, m1);
  full.setUint8(2, f.version ?? 1);
  full.setUint8(3, f.kind ?? 1);
  full.setUint32(4, f.seq ?? 7, true);
  full.setFloat64(8, f.tS ?? 1_700_000_000.5, true);
  full.setFloat64(16, f.fs ?? 25_600, true);
  full.setUint32(24, f.count ?? samples.length, true);
  full.setUint32(28, f.reserved ?? 0, true);
  samples.forEach((s, i) => full.setFloat32(32 + 4 * i, s, true));
  out.set(new Uint8Array(full.buffer, 0, out.length));
  return out;
}

const text = (s: string) => new TextEncoder().encode(s);
const limits = { maxSamples: 16 };

function decodeOk(payload: Uint8Array, lim = limits) {
  const r = decodeSampleBlock(payload, lim);
  if (!r.ok) throw new Error(`expected a block, got ${r.reason}: ${r.detail}`);
  return r;
}

describe('decodeSampleBlock: binary v1', () => {
  it('reads a block written byte by byte from the contract layout', () => {
    const r = decodeOk(handBuilt());
    expect(r.format).toBe('binary');
    // values written by handBuilt's defaults; 0.5 and -1.25 are exact in binary32
    expect(r.block.seq).toBe(7);
    expect(r.block.tS).toBe(1_700_000_000.5);
    expect(r.block.sampleRateHz).toBe(25_600);
    expect(Array.from(r.block.samples)).toEqual([0.5, -1.25]);
  });

  it('the encoder writes the same bytes as the hand-built layout', () => {
    const block: SampleBlock = { tS: 1_700_000_000.5, sampleRateHz: 25_600, seq: 7, samples: new Float32Array([0.5, -1.25]) };
    expect(Array.from(encodeSampleBlockBinary(block))).toEqual(Array.from(handBuilt()));
  });

  it('the worked example in docs/payloads.md decodes to the values the document states', () => {
    // Keeps the document true: the hex dump between the markers is decoded here.
    const doc = readFileSync(new URL('../docs/payloads.md', import.meta.url), 'utf8');
    const dump = /<!-- hex-example -->\s*```text\n([\s\S]*?)```/.exec(doc);
    expect(dump, 'docs/payloads.md lost its hex example block').not.toBeNull();
    const hex = dump![1]
      .split('\n')
      .map((l) => l.replace(/^[0-9a-f]{2}:\s*/i, '').replace(/\s*#.*$/, ''))
      .join(' ')
      .trim()
      .split(/\s+/);
    const bytes = Uint8Array.from(hex.map((h) => parseInt(h, 16)));
    expect(Array.from(bytes), 'doc hex against the hand-built layout').toEqual(Array.from(handBuilt()));
    const r = decodeOk(bytes);
    expect(r.block).toEqual({ tS: 1_700_000_000.5, sampleRateHz: 25_600, seq: 7, samples: new Float32Array([0.5, -1.25]) });
  });

  it('one sample', () => {
    expect(Array.from(decodeOk(handBuilt({ samples: [3] })).block.samples)).toEqual([3]);
  });

  it.each([1, 2, 3, 5])('reads a payload at odd byteOffset %i (an MQTT buffer slice)', (byteOffset) => {
    const samples = [1.5, -2.25, 1e-30, 65504, -0];
    const payload = handBuilt({ samples, byteOffset });
    expect(payload.byteOffset).toBe(byteOffset);
    const r = decodeOk(payload);
    // 1e-30 is not exact in binary32: compare with its binary32 rounding (Math.fround)
    expect(Array.from(r.block.samples)).toEqual(samples.map(Math.fround));
    expect(Object.is(r.block.samples[4], -0)).toBe(true);
    expect(r.block.samples.byteOffset % 4).toBe(0);
  });

  it('reads a Node Buffer slice of a shared pool', () => {
    const src = handBuilt({ samples: [1, 2, 3] });
    const pool = Buffer.alloc(src.length + 9);
    pool.set(src, 9);
    const r = decodeOk(pool.subarray(9));
    expect(Array.from(r.block.samples)).toEqual([1, 2, 3]);
  });

  it('the decoded samples do not alias the payload', () => {
    const payload = handBuilt({ samples: [1, 2] });
    const r = decodeOk(payload);
    payload.fill(0, 32);
    expect(Array.from(r.block.samples)).toEqual([1, 2]);
  });

  it('accepts a block of exactly maxSamples', () => {
    const samples = Array.from({ length: 16 }, (_, i) => i);
    expect(decodeOk(handBuilt({ samples })).block.samples.length).toBe(16);
  });

  it('seq is a u32: 4294967295 reads back', () => {
    expect(decodeOk(handBuilt({ seq: 0xffff_ffff })).block.seq).toBe(4_294_967_295);
  });
});

describe('decodeSampleBlock: JSON', () => {
  it('reads the contract form', () => {
    const r = decodeOk(text('{"t": 1700000000.5, "fs": 25600, "seq": 7, "samples": [0.5, -1.25]}'));
    expect(r.format).toBe('json');
    expect(r.block).toEqual({ tS: 1_700_000_000.5, sampleRateHz: 25_600, seq: 7, samples: new Float32Array([0.5, -1.25]) });
  });

  it('keys in any order, JSON whitespace before and inside', () => {
    const r = decodeOk(text(' \t\r\n{ "samples" : [ 1 ,2 ] ,\n "seq":0, "fs":1e3, "t":-5 }\n'));
    expect(r.block).toEqual({ tS: -5, sampleRateHz: 1000, seq: 0, samples: new Float32Array([1, 2]) });
  });

  it('samples are rounded to binary32 (0.1 becomes Math.fround(0.1))', () => {
    const r = decodeOk(text('{"t":0,"fs":1,"seq":1,"samples":[0.1, 3.4028234663852886e38, 1e-46]}'));
    // 3.4028234663852886e38 is the largest binary32; 1e-46 is below the smallest subnormal (1.4e-45) and rounds to 0
    expect(Array.from(r.block.samples)).toEqual([Math.fround(0.1), 3.4028234663852886e38, 0]);
  });

  it('seq up to 2^53 - 1 (largest safe integer) is accepted', () => {
    expect(decodeOk(text('{"t":0,"fs":1,"seq":9007199254740991,"samples":[1]}')).block.seq).toBe(Number.MAX_SAFE_INTEGER);
  });
});

const oneSample = (fields: string) => text(`{${fields}}`);

describe('decodeSampleBlock: every rejection has its reason', () => {
  const cases: Array<[string, Uint8Array, string, RegExp]> = [
    ['empty payload', new Uint8Array(0), 'unknown_format', /empty/],
    ['whitespace only', text('  \n'), 'unknown_format', /only whitespace/],
    ['wrong magic ("qc")', handBuilt({ magic: [0x71, 0x63] }), 'unknown_format', /0x71 \('q'\)/],
    ['top-level array', text('[{"t":0,"fs":1,"seq":0,"samples":[1]}]'), 'unknown_format', /0x5b/],
    ['UTF-8 byte order mark before the JSON', Uint8Array.from([0xef, 0xbb, 0xbf, ...text('{"t":0,"fs":1,"seq":0,"samples":[1]}')]), 'unknown_format', /0xef/],
    ['binary version 2', handBuilt({ version: 2 }), 'unsupported_version', /version 2/],
    ['binary kind 2', handBuilt({ kind: 2 }), 'bad_header', /kind 2/],
    ['binary reserved word not 0', handBuilt({ reserved: 1 }), 'bad_header', /reserved word at offset 28 is 1/],
    ['binary shorter than the header', handBuilt({ samples: [], trim: -12 }), 'bad_length', /20 bytes is shorter than the 32-byte header/],
    ['binary length one byte short', handBuilt({ trim: -1 }), 'bad_length', /39 bytes; count 2 needs exactly 40/],
    ['binary length one byte long', handBuilt({ trim: 1 }), 'bad_length', /41 bytes; count 2 needs exactly 40/],
    ['binary count says 3, payload holds 2', handBuilt({ count: 3 }), 'bad_length', /count 3 needs exactly 44/],
    ['binary huge count on a short payload', handBuilt({ count: 0xffff_ffff }), 'bad_length', /count 4294967295/],
    ['binary NaN sample', handBuilt({ samples: [1, Number.NaN, 2] }), 'non_finite', /sample 1 of 3 is NaN/],
    ['binary +Infinity sample', handBuilt({ samples: [Number.POSITIVE_INFINITY] }), 'non_finite', /sample 0 of 1 is Infinity/],
    ['binary -Infinity sample last', handBuilt({ samples: [1, 2, Number.NEGATIVE_INFINITY] }), 'non_finite', /sample 2 of 3/],
    ['binary NaN t', handBuilt({ tS: Number.NaN }), 'non_finite', /t must be finite, got NaN/],
    ['binary Infinity fs', handBuilt({ fs: Number.POSITIVE_INFINITY }), 'non_finite', /fs must be finite/],
    ['binary fs 0', handBuilt({ fs: 0 }), 'bad_value', /fs must be from 1 to 1000000 Hz, got 0/],
    ['binary fs negative', handBuilt({ fs: -25_600 }), 'bad_value', /got -25600/],
    ['binary empty block', handBuilt({ samples: [] }), 'empty_block', /no samples/],
    ['binary oversize (17 > 16)', handBuilt({ samples: new Array(17).fill(0) }), 'oversize', /17 samples exceeds the limit of 16/],
    ['JSON null in samples', oneSample('"t":0,"fs":1,"seq":0,"samples":[1,null]'), 'bad_type', /samples\[1\] must be a number, got null/],
    ['JSON string in samples', oneSample('"t":0,"fs":1,"seq":0,"samples":["1"]'), 'bad_type', /samples\[0\] must be a number, got "1"/],
    ['JSON sample beyond binary32 range (1e39)', oneSample('"t":0,"fs":1,"seq":0,"samples":[0,1e39]'), 'non_finite', /samples\[1\] = 1e\+39/],
    ['JSON sample 1e400 (Infinity after parse)', oneSample('"t":0,"fs":1,"seq":0,"samples":[-1e400]'), 'non_finite', /-Infinity/],
    ['JSON t 1e400', oneSample('"t":1e400,"fs":1,"seq":0,"samples":[1]'), 'non_finite', /t must be finite, got Infinity/],
    ['JSON string t', oneSample('"t":"1700000000","fs":1,"seq":0,"samples":[1]'), 'bad_type', /t must be a number, got "1700000000"/],
    ['JSON fs 0', oneSample('"t":0,"fs":0,"seq":0,"samples":[1]'), 'bad_value', /fs must be from 1 to 1000000 Hz/],
    ['JSON fs 1e-300 (a block spanning more time than can be stepped)', oneSample('"t":0,"fs":1e-300,"seq":0,"samples":[1]'), 'bad_value', /fs must be from 1 to 1000000 Hz, got 1e-300/],
    ['JSON fs 1e7', oneSample('"t":0,"fs":1e7,"seq":0,"samples":[1]'), 'bad_value', /fs must be from 1 to 1000000 Hz, got 10000000/],
    ['JSON fs negative', oneSample('"t":0,"fs":-1,"seq":0,"samples":[1]'), 'bad_value', /got -1/],
    ['JSON missing seq', oneSample('"t":0,"fs":1,"samples":[1]'), 'missing_field', /missing seq/],
    ['JSON negative seq', oneSample('"t":0,"fs":1,"seq":-1,"samples":[1]'), 'bad_value', /seq must be a whole number .* got -1/],
    ['JSON non-integer seq', oneSample('"t":0,"fs":1,"seq":1.5,"samples":[1]'), 'bad_value', /got 1.5/],
    ['JSON seq 2^53 (beyond safe integers)', oneSample('"t":0,"fs":1,"seq":9007199254740992,"samples":[1]'), 'bad_value', /got 9007199254740992/],
    ['JSON seq as text', oneSample('"t":0,"fs":1,"seq":"3","samples":[1]'), 'bad_type', /seq must be a number/],
    ['JSON samples not a list', oneSample('"t":0,"fs":1,"seq":0,"samples":{"0":1}'), 'bad_type', /samples must be a list/],
    ['JSON empty block', oneSample('"t":0,"fs":1,"seq":0,"samples":[]'), 'empty_block', /no samples/],
    ['JSON oversize (17 > 16)', oneSample(`"t":0,"fs":1,"seq":0,"samples":[${new Array(17).fill(0).join(',')}]`), 'oversize', /17 samples/],
    ['JSON payload beyond the byte cap', oneSample(`"t":0,"fs":1,"seq":0,"samples":[1]${' '.repeat(64 * 16 + 4096)}`), 'oversize', /bytes exceeds the 5120-byte limit/],
    ['JSON unknown extra key', oneSample('"t":0,"fs":1,"seq":0,"samples":[1],"units":"g"'), 'unknown_key', /unknown key "units"/],
    ['JSON misspelt key', oneSample('"time":0,"fs":1,"seq":0,"samples":[1]'), 'unknown_key', /unknown key "time"; expected exactly t, fs, seq, samples/],
    ['truncated JSON', text('{"t":0,"fs":1,"seq":0,"samples":[1,2'), 'bad_json', /./],
    ['JSON with trailing garbage', text('{"t":0,"fs":1,"seq":0,"samples":[1]} x'), 'bad_json', /./],
    ['invalid UTF-8 inside JSON', Uint8Array.from([...text('{"t":0,"fs":1,"seq":0,"samples":[1],"'), 0xff, ...text('":1}')]), 'bad_json', /not valid UTF-8/],
  ];

  it('with a bound (the agent sets +-1e6), a finite sample beyond it drops the block; without one it is data', () => {
    const bounded = { ...limits, maxAbs: 1e6 };
    const beyond: Array<[Uint8Array, RegExp]> = [
      // -1000000.0625 is the float32 next below -1e6 (spacing 2^-4 there)
      [handBuilt({ samples: [1, -1000000.0625] }), /sample 1 of 2 is -1000000.0625, beyond \+-1000000/],
      [oneSample('"t":0,"fs":1,"seq":0,"samples":[0,3e30]'), /samples\[1\] is 2\.999999894026671e\+30, beyond/],
    ];
    for (const [payload, detail] of beyond) {
      const r = decodeSampleBlock(payload, bounded);
      expect(r.ok ? 'accepted' : r.reason).toBe('sample_out_of_range');
      expect(r.ok ? '' : r.detail).toMatch(detail);
      expect(decodeSampleBlock(payload, limits).ok, 'no bound: any finite float32 is data').toBe(true);
    }
    expect(decodeOk(handBuilt({ samples: [1e6, -1e6] }), bounded).block.samples.length, 'the bound itself is inside').toBe(2);
    const nan = decodeSampleBlock(handBuilt({ samples: [Number.NaN] }), bounded);
    expect(nan.ok ? 'accepted' : nan.reason, 'NaN stays non_finite under a bound').toBe('non_finite');
  });

  it('under the bound, an accepted block carries every sample bit for bit (-0, subnormals, the bound, odd lengths and offsets)', () => {
    const bounded = { maxSamples: 4096, maxAbs: 1e6 };
    // IEEE 754 binary32: signed zeros, the smallest subnormal (2^-149) and another below the
    // smallest normal (2^-126), the bound and the float32 just inside it (spacing 2^-4 there),
    // a decimal that rounds to the smallest subnormal, and a small normal.
    const special = [-0, 0, 2 ** -149, -(2 ** -149), 2 ** -126 / 3, 1e6, -1e6, 999999.9375, 1.5e-45, 3.4e-38];
    for (const n of [1, 3, 4, 5, 17, 2560, 4093]) {
      const samples = Array.from({ length: n }, (_, i) => (i < special.length ? special[i] : Math.fround(Math.sin(i * 1.7) * 10 ** ((i % 13) - 6))));
      const payload = handBuilt({ samples, byteOffset: n % 4 });
      const got = decodeOk(payload, bounded).block.samples;
      const want = Float32Array.from(samples);
      expect(got.length).toBe(n);
      expect(new Uint32Array(got.buffer, got.byteOffset, n)).toEqual(new Uint32Array(want.buffer));
    }
  });

  it('names the first unusable sample wherever it lies (every position of short blocks, spots in a 2560-sample one)', () => {
    const bounded = { maxSamples: 4096, maxAbs: 1e6 };
    const bad: Array<[number, string]> = [
      [Number.NaN, 'non_finite'],
      [Number.POSITIVE_INFINITY, 'non_finite'],
      [Number.NEGATIVE_INFINITY, 'non_finite'],
      [1000000.0625, 'sample_out_of_range'],
      [-1000000.0625, 'sample_out_of_range'],
    ];
    const spots: Array<[number, number]> = [];
    for (let n = 1; n <= 20; n++) for (let at = 0; at < n; at++) spots.push([n, at]);
    for (const at of [0, 7, 8, 9, 1000, 2551, 2552, 2558, 2559]) spots.push([2560, at]);
    for (const [n, at] of spots) {
      for (const [value, reason] of bad) {
        // In-bound values around it, the bound itself included; a second bad sample after it.
        const samples = Array.from({ length: n }, (_, i) => (i % 3 === 0 ? 1e6 : i % 3 === 1 ? -1e6 : i * 0.5));
        samples[at] = value;
        if (at + 1 < n) samples[n - 1] = Number.NaN;
        const r = decodeSampleBlock(handBuilt({ samples, byteOffset: 1 }), bounded);
        expect(r.ok ? 'accepted' : r.reason, `${value} at ${at} of ${n}`).toBe(reason);
        expect(r.ok ? '' : r.detail).toContain(`sample ${at} of ${n} is `);
      }
      const clean = Array.from({ length: n }, (_, i) => (i % 2 === 0 ? 1e6 : -1e6));
      expect(decodeSampleBlock(handBuilt({ samples: clean }), bounded).ok, `${n} samples at the bound`).toBe(true);
    }
  });

  it.each(cases)('%s', (name, payload, reason, detail) => {
    const r = decodeSampleBlock(payload, limits);
    const got = r.ok ? { ok: true } : { reason: r.reason, detail: r.detail };
    expect(got, `input: ${name}; expected reason ${reason}`).toMatchObject({ reason });
    expect(r.ok ? '' : r.detail, `detail of ${name}`).toMatch(detail);
  });

  it('the reasons used are all registered drop reasons', () => {
    for (const [, , reason] of cases) expect(DROP_REASONS).toContain(reason);
  });

  it('details quote at most 40 characters of an offending value, then how many more there were', () => {
    const r = decodeSampleBlock(oneSample(`"t":"${'x'.repeat(500)}","fs":1,"seq":0,"samples":[1]`), limits);
    expect(r.ok ? '' : r.detail).toMatch(/^t must be a number, got "x{39}\.\.\. \(462 more characters\)$/);
  });

  it('a limit that is not a whole number >= 1 is a QB_E_PAYLOAD_ARGUMENT error', () => {
    for (const maxSamples of [0, -1, 1.5, Number.NaN]) {
      expect(() => decodeSampleBlock(handBuilt(), { maxSamples }), `maxSamples ${maxSamples}`).toThrow(QbandError);
    }
    try {
      decodeSampleBlock(handBuilt(), { maxSamples: 0 });
    } catch (e) {
      expect((e as QbandError).code).toBe('QB_E_PAYLOAD_ARGUMENT');
    }
  });

  it('the default limit is 2^18 samples', () => {
    // 262144 = 2^18: the agent's pinned default (docs/payloads.md, "Size limit")
    expect(DEFAULT_MAX_SAMPLES_PER_BLOCK).toBe(2 ** 18);
  });
});

describe('round trips', () => {
  const blocks: Array<[string, SampleBlock]> = [
    ['one sample', { tS: 0, sampleRateHz: 1, seq: 0, samples: new Float32Array([1]) }],
    ['epoch time and fractional rate', { tS: 1_712_345_678.123456, sampleRateHz: 51_200 / 3, seq: 123_456, samples: new Float32Array([0.1, -0.2, 1e-7, 3.4e38]) }],
    ['binary32 extremes: largest, smallest subnormal, -0', { tS: -1.5, sampleRateHz: 1, seq: 4_294_967_295, samples: new Float32Array([3.4028234663852886e38, 1.401298464324817e-45, -0, -1.1754943508222875e-38]) }],
  ];

  it.each(blocks)('binary: %s', (_name, block) => {
    const r = decodeOk(encodeSampleBlockBinary(block), { maxSamples: 8 });
    expect(r.block).toEqual(block);
    expect(Array.from(r.block.samples).map((x) => Object.is(x, -0))).toEqual(Array.from(block.samples).map((x) => Object.is(x, -0)));
  });

  it.each(blocks)('JSON: %s', (_name, block) => {
    const r = decodeOk(text(encodeSampleBlockJson(block)), { maxSamples: 8 });
    expect(r.block).toEqual(block);
    expect(Array.from(r.block.samples).map((x) => Object.is(x, -0))).toEqual(Array.from(block.samples).map((x) => Object.is(x, -0)));
  });

  it('JSON writes the shortest text that reads back as the same binary32', () => {
    const json = encodeSampleBlockJson({ tS: 2, sampleRateHz: 10, seq: 3, samples: new Float32Array([0.1, 0.5, -0, 123456.789]) });
    // Math.fround(0.1) prints as 0.1 with 1 significant digit; 123456.789 needs 8 in binary32 (123456.79)
    expect(json).toBe('{"t":2,"fs":10,"seq":3,"samples":[0.1,0.5,-0,123456.79]}');
  });

  it('a binary encode of a subarray view writes only its own samples', () => {
    const backing = new Float32Array([9, 1, 2, 9]);
    const bytes = encodeSampleBlockBinary({ tS: 0, sampleRateHz: 1, seq: 0, samples: backing.subarray(1, 3) });
    expect(Array.from(decodeOk(bytes).block.samples)).toEqual([1, 2]);
  });
});

describe('encoders refuse what the decoder would drop (QB_E_PAYLOAD_ARGUMENT)', () => {
  const good: SampleBlock = { tS: 0, sampleRateHz: 100, seq: 1, samples: new Float32Array([1]) };
  const bad: Array<[string, SampleBlock, RegExp]> = [
    ['NaN sample', { ...good, samples: new Float32Array([0, Number.NaN]) }, /sample 1 is NaN/],
    ['no samples', { ...good, samples: new Float32Array(0) }, /at least one sample/],
    ['fs 0', { ...good, sampleRateHz: 0 }, /fs must be from 1 to 1000000 Hz, got 0/],
    ['t Infinity', { ...good, tS: Number.POSITIVE_INFINITY }, /t must be finite/],
    ['seq -1', { ...good, seq: -1 }, /seq must be a whole number/],
  ];
  it.each(bad)('%s', (_name, block, message) => {
    for (const encode of [encodeSampleBlockBinary, encodeSampleBlockJson]) {
      let caught: unknown;
      try {
        encode(block);
      } catch (e) {
        caught = e;
      }
      expect(caught).toBeInstanceOf(QbandError);
      expect((caught as QbandError).code).toBe('QB_E_PAYLOAD_ARGUMENT');
      expect((caught as QbandError).message).toMatch(message);
    }
  });

  it('seq 2^32 does not fit binary but does fit JSON', () => {
    const block = { ...good, seq: 2 ** 32 };
    expect(() => encodeSampleBlockBinary(block)).toThrow(/seq must be a whole number from 0 to 4294967295, got 4294967296/);
    expect(decodeOk(text(encodeSampleBlockJson(block))).block.seq).toBe(2 ** 32);
  });
});
