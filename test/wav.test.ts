import { existsSync, readFileSync, mkdtempSync, writeFileSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { encodeWav, readWavBlocks, readWavInfo, WavWriter, type RecordingBlock, type WavSampleFormat } from '../src/acquisition/wav.ts';
import { openRecording, readRecordingInfo } from '../src/acquisition/recordingReader.ts';
import { QbandError } from '../src/errors.ts';

const dir = mkdtempSync(join(tmpdir(), 'qband-wav-'));
let fileNo = 0;
function tmpFile(bytes: Buffer | Uint8Array, ext = '.wav'): string {
  const p = join(dir, `f${fileNo++}${ext}`);
  writeFileSync(p, bytes);
  return p;
}

async function readAll(path: string, framesPerBlock = 4096): Promise<{ blocks: RecordingBlock[]; channels: Float32Array[] }> {
  const blocks: RecordingBlock[] = [];
  for await (const b of readWavBlocks(path, framesPerBlock)) blocks.push(b);
  const nCh = blocks[0]?.info.channels ?? 0;
  const total = blocks.reduce((s, b) => s + b.channels[0].length, 0);
  const channels = Array.from({ length: nCh }, () => new Float32Array(total));
  for (const b of blocks) b.channels.forEach((c, i) => channels[i].set(c, b.startFrame));
  return { blocks, channels };
}

async function expectCode(p: Promise<unknown>, code: string, quote: RegExp): Promise<void> {
  const err = await p.then(
    () => undefined,
    (e: unknown) => e,
  );
  expect(err, `expected ${code}`).toBeInstanceOf(QbandError);
  expect((err as QbandError).code).toBe(code);
  expect((err as QbandError).message).toMatch(quote);
}


/** A test signal in [-1, 1) that visits both ends of the range and differs per channel. */
function testChannels(nCh: number, frames: number): Float32Array[] {
  return Array.from({ length: nCh }, (_, c) => {
    const x = new Float32Array(frames);
    for (let i = 0; i < frames; i++) x[i] = Math.sin(0.37 * i + c) * 0.9 + (i === 0 ? -0.1 : 0);
    x[1] = -1;
    x[2] = 0.999;
    return x;
  });
}

// Little-endian helpers for headers written by hand.
const u16 = (v: number) => [v & 0xff, (v >> 8) & 0xff];
const u32 = (v: number) => [v & 0xff, (v >> 8) & 0xff, (v >> 16) & 0xff, (v >>> 24) & 0xff];
const ascii = (s: string) => [...s].map((ch) => ch.charCodeAt(0));
/** The 14 bytes after the format tag in every KSDATAFORMAT_SUBTYPE_* GUID. */
const GUID_TAIL = [0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71];

function riff(chunks: number[][]): Buffer {
  const body = chunks.flat();
  return Buffer.from([...ascii('RIFF'), ...u32(4 + body.length), ...ascii('WAVE'), ...body]);
}
const chunk = (id: string, body: number[]) => [...ascii(id), ...u32(body.length), ...body, ...(body.length & 1 ? [0] : [])];
const fmtPlain = (tag: number, ch: number, fs: number, bits: number) =>
  chunk('fmt ', [...u16(tag), ...u16(ch), ...u32(fs), ...u32((fs * ch * bits) / 8), ...u16((ch * bits) / 8), ...u16(bits)]);

describe('WAV round trip through encodeWav and readWavBlocks', () => {
  // Quantisation bound: integer PCM rounds to the nearest code, so |error| <= half a code,
  // 0.5 / 2^(bits-1) (common practice); float32 must come back bit for bit.
  const halfCode: Record<WavSampleFormat, number> = { pcm16: 0.5 / 32768, pcm24: 0.5 / 8388608, pcm32: 0.5 / 2147483648, float32: 0 };
  for (const format of ['pcm16', 'pcm24', 'pcm32', 'float32'] as const) {
    for (const nCh of [1, 2, 3]) {
      for (const extensible of [false, true]) {
        it(`${format}, ${nCh} channel(s)${extensible ? ', WAVE_FORMAT_EXTENSIBLE' : ''}, 257 frames (odd)`, async () => {
          const x = testChannels(nCh, 257);
          const path = tmpFile(encodeWav(x, 8000, format, extensible));
          const info = await readWavInfo(path);
          expect(info).toEqual({ sampleRateHz: 8000, channels: nCh, frames: 257, format: extensible ? `${format} extensible` : format });
          const { channels } = await readAll(path);
          for (let c = 0; c < nCh; c++) {
            for (let i = 0; i < 257; i++) {
              const err = Math.abs(channels[c][i] - x[c][i]);
              // float32 division of the integer code adds at most one float32 rounding (6e-8).
              const tol = halfCode[format] + (format === 'float32' ? 0 : 6e-8);
              if (err > tol) expect.fail(`ch ${c} frame ${i}: input ${x[c][i]}, read ${channels[c][i]}, |err| ${err} > ${tol}`);
            }
          }
        });
      }
    }
  }
});

describe('WAV headers written by hand from the RIFF/WAVE specification', () => {
  // Byte layout from "Multimedia Programming Interface and Data Specifications 1.0"
  // (Microsoft/IBM, 1991), RIFF and WAVE chapters: RIFF size counts from "WAVE"; fmt is
  // tag, channels, rate, byte rate, block align, bits; chunks of odd size carry a pad byte.
  it('reads 2-channel 16-bit PCM behind an odd-sized LIST chunk with its pad byte', async () => {
    const bytes = riff([
      fmtPlain(1, 2, 8000, 16),
      chunk('LIST', [...ascii('INFOabc')]), // 7 bytes: one pad byte follows
      chunk('data', [...u16(0x0001), ...u16(0x8000), ...u16(0x7fff), ...u16(0xffff), ...u16(0x4000), ...u16(0xc000)]),
    ]);
    const path = tmpFile(bytes);
    const { blocks, channels } = await readAll(path);
    expect(blocks[0].info).toEqual({ sampleRateHz: 8000, channels: 2, frames: 3, format: 'pcm16' });
    // Expected values: code / 32768 (two's complement codes from the bytes above).
    expect(Array.from(channels[0])).toEqual([1 / 32768, 32767 / 32768, 0.5]);
    expect(Array.from(channels[1])).toEqual([-1, -1 / 32768, -0.5]);
  });

  it('sign-extends 24-bit PCM (0x800000 is -1, 0xffffff is -1/2^23, 0x7fffff is the top code)', async () => {
    const s24 = (b0: number, b1: number, b2: number) => [b0, b1, b2];
    const bytes = riff([
      fmtPlain(1, 1, 1000, 24),
      chunk('data', [...s24(0x00, 0x00, 0x80), ...s24(0xff, 0xff, 0xff), ...s24(0xff, 0xff, 0x7f), ...s24(0x00, 0x00, 0x40), ...s24(0x01, 0x00, 0x00)]),
    ]);
    const { channels } = await readAll(tmpFile(bytes));
    // float32 of code/2^23; 8388607/8388608 rounds to 1 in float32, hence Math.fround.
    expect(Array.from(channels[0])).toEqual([-1, -1 / 8388608, Math.fround(8388607 / 8388608), 0.5, 1 / 8388608]);
  });

  it('reads WAVE_FORMAT_EXTENSIBLE with the IEEE-float sub-format GUID', async () => {
    const floats = Buffer.alloc(8);
    floats.writeFloatLE(0.25, 0);
    floats.writeFloatLE(-3.5, 4); // float data is not limited to [-1, 1)
    const fmt = chunk('fmt ', [
      ...u16(0xfffe), ...u16(1), ...u32(48000), ...u32(192000), ...u16(4), ...u16(32),
      ...u16(22), ...u16(32), ...u32(0x4), ...u16(0x0003), ...GUID_TAIL,
    ]);
    const path = tmpFile(riff([fmt, chunk('fact', u32(2)), chunk('data', [...floats])]));
    const { blocks, channels } = await readAll(path);
    expect(blocks[0].info.format).toBe('float32 extensible');
    expect(Array.from(channels[0])).toEqual([0.25, -3.5]);
  });

  it('reads a zero-length data chunk as a recording with no blocks', async () => {
    const path = tmpFile(riff([fmtPlain(1, 1, 8000, 16), chunk('data', [])]));
    expect((await readWavInfo(path)).frames).toBe(0);
    expect((await readAll(path)).blocks).toHaveLength(0);
  });

  it('reads a one-sample file', async () => {
    const { channels } = await readAll(tmpFile(riff([fmtPlain(1, 1, 8000, 16), chunk('data', u16(0x2000))])));
    expect(Array.from(channels[0])).toEqual([0.25]);
  });
});

describe('WAV files qband refuses, with QB_E_WAV_FORMAT quoting what was found', () => {
  const data = chunk('data', u16(0));
  it('empty file', () => expectCode(readWavInfo(tmpFile(Buffer.alloc(0))), 'QB_E_WAV_FORMAT', /0 bytes/));
  it('not RIFF', () => expectCode(readWavInfo(tmpFile(Buffer.from('RIFX\0\0\0\0WAVEfmt '))), 'QB_E_WAV_FORMAT', /'RIFX'/));
  it('8-bit PCM', () => expectCode(readWavInfo(tmpFile(riff([fmtPlain(1, 1, 8000, 8), chunk('data', [0x80])]))), 'QB_E_WAV_FORMAT', /8 bits/));
  it('64-bit float', () => expectCode(readWavInfo(tmpFile(riff([fmtPlain(3, 1, 8000, 64), data]))), 'QB_E_WAV_FORMAT', /IEEE float of 64 bits/));
  it('ADPCM format tag 0x0002', () => expectCode(readWavInfo(tmpFile(riff([fmtPlain(2, 1, 8000, 16), data]))), 'QB_E_WAV_FORMAT', /0x0002/));
  it('extensible with an unknown sub-format GUID', async () => {
    const fmt = chunk('fmt ', [...u16(0xfffe), ...u16(1), ...u32(8000), ...u32(16000), ...u16(2), ...u16(16), ...u16(22), ...u16(16), ...u32(0), ...Array(16).fill(0x11)]);
    await expectCode(readWavInfo(tmpFile(riff([fmt, data]))), 'QB_E_WAV_FORMAT', /GUID 1111/);
  });
  it('data chunk before fmt', () => expectCode(readWavInfo(tmpFile(riff([data, fmtPlain(1, 1, 8000, 16)]))), 'QB_E_WAV_FORMAT', /before any fmt/));
  it('no data chunk', () => expectCode(readWavInfo(tmpFile(riff([fmtPlain(1, 1, 8000, 16)]))), 'QB_E_WAV_FORMAT', /no data chunk/));
  it('block align that disagrees with channels x bytes', async () => {
    const fmt = chunk('fmt ', [...u16(1), ...u16(2), ...u32(8000), ...u32(32000), ...u16(3), ...u16(16)]);
    await expectCode(readWavInfo(tmpFile(riff([fmt, data]))), 'QB_E_WAV_FORMAT', /block align 3/);
  });
  it('truncated: the data chunk declares more bytes than the file holds', async () => {
    const whole = encodeWav([new Float32Array(100)], 8000, 'pcm16');
    await expectCode(readWavInfo(tmpFile(whole.subarray(0, whole.length - 11))), 'QB_E_WAV_FORMAT', /declares 200 bytes but only 189 follow/);
  });
  it('truncated inside the header', async () => {
    const whole = encodeWav([new Float32Array(4)], 8000, 'pcm16');
    await expectCode(readWavInfo(tmpFile(whole.subarray(0, 30))), 'QB_E_WAV_FORMAT', /fmt chunk/);
  });
  it('corrupt: garbage where a chunk id belongs', async () => {
    const bytes = riff([fmtPlain(1, 1, 8000, 16), [0x00, 0xff, 0x13, 0x07, ...u32(2), 0, 0], data]);
    await expectCode(readWavInfo(tmpFile(bytes)), 'QB_E_WAV_FORMAT', /not printable/);
  });
  it('corrupt: data size not a whole number of frames', async () => {
    await expectCode(readWavInfo(tmpFile(riff([fmtPlain(1, 2, 8000, 16), chunk('data', [1, 2, 3, 4, 5, 6])]))), 'QB_E_WAV_FORMAT', /6 bytes is not a whole number of 4-byte frames/);
  });
  it('a missing file is QB_E_FILE_READ', () => expectCode(readWavInfo(join(dir, 'absent.wav')), 'QB_E_FILE_READ', /absent\.wav/));
  it('an unknown extension is QB_E_RECORDING_TYPE', () => expectCode(readRecordingInfo(tmpFile(Buffer.alloc(4), '.flac')), 'QB_E_RECORDING_TYPE', /'\.flac'/));
});

describe('WAV block streaming', () => {
  it('splits 1000 frames into blocks of 300, 300, 300 and 100 with the right start frames and times', async () => {
    const x = testChannels(2, 1000);
    const path = tmpFile(encodeWav(x, 2000, 'float32'));
    const { blocks, channels } = await readAll(path, 300);
    expect(blocks.map((b) => [b.startFrame, b.channels[0].length, b.t0S])).toEqual([
      [0, 300, 0],
      [300, 300, 0.15],
      [600, 300, 0.3],
      [900, 100, 0.45],
    ]);
    expect(channels).toEqual(x);
  });

  it('reads through openRecording by extension', async () => {
    const x = testChannels(1, 10);
    const blocks: RecordingBlock[] = [];
    for await (const b of openRecording(tmpFile(encodeWav(x, 100, 'float32')), 4)) blocks.push(b);
    expect(blocks.map((b) => b.channels[0].length)).toEqual([4, 4, 2]);
  });

  it('WavWriter streams uneven blocks and patches RIFF and data sizes at close (odd data: pad byte)', async () => {
    const path = join(dir, 'streamed.wav');
    const w = await WavWriter.create(path, { sampleRateHz: 1000, channels: 1, format: 'pcm24' });
    const x = testChannels(1, 301)[0];
    await w.write([x.subarray(0, 100)]);
    await w.write([x.subarray(100, 101)]);
    await w.write([x.subarray(101)]);
    await w.close();
    const bytes = readFileSync(path);
    expect(bytes.length).toBe(statSync(path).size);
    expect(w.fileBytes).toBe(bytes.length);
    // RIFF size = file size - 8 (specification: counts everything after the size field, pad included).
    expect(bytes.readUInt32LE(4)).toBe(bytes.length - 8);
    expect(bytes.readUInt32LE(bytes.length - 1 - 903 - 4)).toBe(903); // data size: 301 frames x 3 bytes
    const { channels } = await readAll(path);
    expect(channels[0].length).toBe(301);
    for (let i = 0; i < 301; i++) expect(Math.abs(channels[0][i] - x[i])).toBeLessThanOrEqual(0.5 / 8388608 + 6e-8);
  });

  it('pcm16 clamps out-of-range samples and NaN, and counts them', async () => {
    const path = join(dir, 'clip.wav');
    const w = await WavWriter.create(path, { sampleRateHz: 1000, channels: 1, format: 'pcm16' });
    await w.write([Float32Array.from([1, 2, -1, -1.5, NaN, 0.5])]);
    await w.close();
    expect(w.clippedSamples).toBe(4);
    const { channels } = await readAll(path);
    expect(Array.from(channels[0])).toEqual([32767 / 32768, 32767 / 32768, -1, -1, 0, 0.5]);
  });
});

const recordingsDir = new URL('../../shared/data/recordings/', import.meta.url);
const recordingsPath = fileURLToPath(recordingsDir);
const haveRecordings = existsSync(new URL('manifest.json', recordingsDir));
if (!haveRecordings) console.warn(`wav.test: skipping the open recordings: ${recordingsPath}manifest.json not found`);

describe.skipIf(!haveRecordings)('open recordings in shared/data/recordings (manifest.json)', () => {
  const manifest = haveRecordings
    ? (JSON.parse(readFileSync(new URL('manifest.json', recordingsDir), 'utf8')) as {
        recordings: Record<string, { fs_hz: number; samples: number; rms_g_ac: number }>;
      })
    : { recordings: {} };
  for (const [name, m] of Object.entries(manifest.recordings)) {
    it(`${name}: ${m.samples} samples at ${m.fs_hz} Hz, AC RMS ${m.rms_g_ac} g`, async () => {
      const path = join(recordingsPath, name);
      let n = 0;
      let sum = 0;
      let sumSq = 0;
      // Blocks of 10007 frames: not a divisor of any file length, so a partial last block is read.
      for await (const b of readWavBlocks(path, 10007)) {
        expect(b.info.sampleRateHz).toBe(m.fs_hz);
        for (const v of b.channels[0]) {
          sum += v;
          sumSq += v * v;
          n++;
        }
      }
      expect(n).toBe(m.samples);
      const mean = sum / n;
      const rmsAc = Math.sqrt(sumSq / n - mean * mean);
      // Manifest gives 6 decimals: rounding alone is up to 5e-7 g; 2e-6 g allows for the
      // summation order of a different library (double sums, float32 samples).
      const tol = 2e-6;
      if (Math.abs(rmsAc - m.rms_g_ac) > tol) expect.fail(`${name}: expected AC RMS ${m.rms_g_ac} g, got ${rmsAc}, tolerance ${tol}`);
    });
  }
});

describe('WAV reader stopped early while a read ahead is in flight', () => {
  it('closes cleanly, and the next reader (which takes the same decoders) reads the file whole and right', async () => {
    // Two channels of 300,000 frames: 2.4 MB, several reads of 1 MiB.
    const n = 300_000;
    const a = Float32Array.from({ length: n }, (_, i) => Math.sin(i * 0.001));
    const b = Float32Array.from({ length: n }, (_, i) => (i % 977) / 977 - 0.5);
    const path = tmpFile(encodeWav([a, b], 25600));
    for (const stopAfter of [1, 40, 200]) {
      let blocks = 0;
      for await (const block of readWavBlocks(path, 4096, [0, 1], true)) {
        expect(block.channels[0][0]).toBe(a[block.startFrame]);
        if (++blocks === stopAfter) break;
      }
    }
    const { channels } = await readAll(path, 4096);
    expect(channels[0]).toEqual(a);
    expect(channels[1]).toEqual(b);
  });
});
