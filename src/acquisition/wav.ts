/**
 * RIFF/WAVE recordings: header parsing, a streaming block reader and a streaming writer.
 *
 * Layout (Microsoft/IBM "Multimedia Programming Interface and Data Specifications 1.0", 1991,
 * RIFF chapter; WAVE_FORMAT_EXTENSIBLE from Microsoft's later extension of it):
 *   "RIFF" <u32 size> "WAVE" then chunks <4-char id> <u32 size> <size bytes> [pad byte if odd].
 *   fmt : u16 formatTag, u16 channels, u32 sampleRate, u32 byteRate, u16 blockAlign,
 *         u16 bitsPerSample [, u16 cbSize [, u16 validBits, u32 channelMask, 16-byte GUID]].
 *   data: interleaved frames, little-endian.
 * Read here: integer PCM of 16, 24 and 32 bits, 32-bit IEEE float, and WAVE_FORMAT_EXTENSIBLE
 * whose sub-format is one of those. Everything else is refused with QB_E_WAV_FORMAT naming what
 * was found. Integer PCM is normalised to [-1, 1) by dividing by 2^(bits-1).
 */
import { open, type FileHandle } from 'node:fs/promises';
import { QbandError } from '../errors.ts';

export interface RecordingInfo {
  sampleRateHz: number;
  channels: number;
  frames: number;
  /** e.g. 'pcm16', 'pcm24', 'pcm32', 'float32' (with ' extensible' when so wrapped), or 'csv'. */
  format: string;
}

export interface RecordingBlock {
  info: RecordingInfo;
  startFrame: number;
  /** startFrame / sampleRateHz: seconds from the first frame of the recording. */
  t0S: number;
  /** One array per channel, de-interleaved. */
  channels: Float32Array[];
}

export type WavSampleFormat = 'pcm16' | 'pcm24' | 'pcm32' | 'float32';

/** What the header says, plus where the samples are. */
export interface WavLayout extends RecordingInfo {
  sampleFormat: WavSampleFormat;
  blockAlign: number;
  dataOffset: number;
  dataBytes: number;
}

const FORMAT_PCM = 0x0001;
const FORMAT_IEEE_FLOAT = 0x0003;
const FORMAT_EXTENSIBLE = 0xfffe;
/** Bytes 2..15 of every KSDATAFORMAT_SUBTYPE_* GUID; bytes 0..1 hold the plain format tag. */
const SUBTYPE_GUID_TAIL = Buffer.from([
  0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71,
]);

function wavError(name: string, what: string): QbandError {
  return new QbandError('QB_E_WAV_FORMAT', `${name}: ${what}`);
}

function sampleFormatOf(tag: number, bits: number, name: string, wrapped: boolean): WavSampleFormat {
  const where = wrapped ? ' (WAVE_FORMAT_EXTENSIBLE sub-format)' : '';
  if (tag === FORMAT_PCM) {
    if (bits === 16) return 'pcm16';
    if (bits === 24) return 'pcm24';
    if (bits === 32) return 'pcm32';
    throw wavError(name, `integer PCM of ${bits} bits per sample${where} is not supported; expected 16, 24 or 32`);
  }
  if (tag === FORMAT_IEEE_FLOAT) {
    if (bits === 32) return 'float32';
    throw wavError(name, `IEEE float of ${bits} bits per sample${where} is not supported; expected 32`);
  }
  throw wavError(
    name,
    `format tag 0x${tag.toString(16).padStart(4, '0')}${where} is not supported; expected 0x0001 (PCM), 0x0003 (IEEE float) or 0xfffe (extensible)`,
  );
}

function quoteId(id: Buffer): string {
  return JSON.stringify(id.toString('latin1'));
}

async function readExactly(fh: FileHandle, position: number, length: number): Promise<Buffer> {
  const buf = Buffer.alloc(length);
  let got = 0;
  while (got < length) {
    const { bytesRead } = await fh.read(buf, got, length - got, position + got);
    if (bytesRead === 0) break;
    got += bytesRead;
  }
  return got === length ? buf : buf.subarray(0, got);
}

/** Reads the chunk list of an open WAV file and returns its layout; the samples are not read. */
export async function parseWavHeader(fh: FileHandle, name: string): Promise<WavLayout> {
  const fileBytes = (await fh.stat()).size;
  const riff = await readExactly(fh, 0, 12);
  if (riff.length < 12) throw wavError(name, `file is ${fileBytes} bytes, too short for a RIFF/WAVE header (12 bytes)`);
  if (riff.toString('latin1', 0, 4) !== 'RIFF' || riff.toString('latin1', 8, 12) !== 'WAVE') {
    throw wavError(name, `starts with ${quoteId(riff.subarray(0, 4))} ... ${quoteId(riff.subarray(8, 12))}, expected "RIFF" ... "WAVE"`);
  }
  let fmt: Omit<WavLayout, 'frames' | 'dataOffset' | 'dataBytes'> | undefined;
  let pos = 12;
  while (pos + 8 <= fileBytes) {
    const head = await readExactly(fh, pos, 8);
    const id = head.toString('latin1', 0, 4);
    const size = head.readUInt32LE(4);
    const body = pos + 8;
    if (id === 'fmt ') {
      if (size < 16) throw wavError(name, `fmt chunk is ${size} bytes, expected at least 16`);
      const f = await readExactly(fh, body, Math.min(size, 40));
      if (f.length < 16) throw wavError(name, `file ends inside the fmt chunk (offset ${body})`);
      fmt = parseFmt(f, name);
    } else if (id === 'data') {
      if (!fmt) throw wavError(name, `data chunk at offset ${pos} comes before any fmt chunk`);
      const available = fileBytes - body;
      if (size > available) {
        throw wavError(name, `data chunk declares ${size} bytes but only ${available} follow it: the file is truncated`);
      }
      if (size % fmt.blockAlign !== 0) {
        throw wavError(name, `data chunk of ${size} bytes is not a whole number of ${fmt.blockAlign}-byte frames: the file is truncated or corrupt`);
      }
      return { ...fmt, frames: size / fmt.blockAlign, dataOffset: body, dataBytes: size };
    } else if (!/^[\x20-\x7e]{4}$/.test(id)) {
      throw wavError(name, `chunk id ${quoteId(head.subarray(0, 4))} at offset ${pos} is not printable: the file is corrupt`);
    }
    // Unknown chunks (LIST, fact, cue, ...) are skipped; odd sizes carry one pad byte.
    pos = body + size + (size & 1);
  }
  throw wavError(name, fmt ? 'no data chunk found' : 'no fmt chunk found');
}

function parseFmt(f: Buffer, name: string): Omit<WavLayout, 'frames' | 'dataOffset' | 'dataBytes'> {
  const tag = f.readUInt16LE(0);
  const channels = f.readUInt16LE(2);
  const sampleRateHz = f.readUInt32LE(4);
  const blockAlign = f.readUInt16LE(12);
  const bits = f.readUInt16LE(14);
  let sampleFormat: WavSampleFormat;
  let format: string;
  if (tag === FORMAT_EXTENSIBLE) {
    if (f.length < 40 || f.readUInt16LE(16) < 22) {
      throw wavError(name, `WAVE_FORMAT_EXTENSIBLE fmt chunk is ${f.length} bytes, expected 40 (cbSize 22)`);
    }
    const guid = f.subarray(24, 40);
    if (!guid.subarray(2).equals(SUBTYPE_GUID_TAIL)) {
      throw wavError(name, `WAVE_FORMAT_EXTENSIBLE sub-format GUID ${guid.toString('hex')} is not a PCM or IEEE-float sub-format`);
    }
    sampleFormat = sampleFormatOf(guid.readUInt16LE(0), bits, name, true);
    format = `${sampleFormat} extensible`;
  } else {
    sampleFormat = sampleFormatOf(tag, bits, name, false);
    format = sampleFormat;
  }
  if (channels === 0) throw wavError(name, 'fmt chunk says 0 channels');
  if (sampleRateHz === 0) throw wavError(name, 'fmt chunk says a sample rate of 0 Hz');
  if (blockAlign !== channels * (bits / 8)) {
    throw wavError(name, `block align ${blockAlign} bytes does not equal ${channels} channels x ${bits / 8} bytes`);
  }
  return { sampleRateHz, channels, format, sampleFormat, blockAlign };
}

/** Header facts of a WAV file without reading its samples. */
export async function readWavInfo(path: string): Promise<RecordingInfo> {
  const fh = await openForRead(path);
  try {
    const { sampleRateHz, channels, frames, format } = await parseWavHeader(fh, path);
    return { sampleRateHz, channels, frames, format };
  } finally {
    await fh.close();
  }
}

async function openForRead(path: string): Promise<FileHandle> {
  try {
    return await open(path, 'r');
  } catch (err) {
    throw new QbandError('QB_E_FILE_READ', `${path}: cannot open (${(err as Error).message})`, { cause: err });
  }
}

/** De-interleaves `frames` frames from `src` into `out[ch][offset..]`, normalising integer PCM. */
export function decodeFrames(src: Buffer, sampleFormat: WavSampleFormat, out: Float32Array[], frames: number): void {
  const channels = out.length;
  let p = 0;
  switch (sampleFormat) {
    case 'pcm16':
      for (let i = 0; i < frames; i++) for (let c = 0; c < channels; c++, p += 2) out[c][i] = src.readInt16LE(p) / 32768;
      break;
    case 'pcm24':
      // readIntLE(.., 3) sign-extends bit 23.
      for (let i = 0; i < frames; i++) for (let c = 0; c < channels; c++, p += 3) out[c][i] = src.readIntLE(p, 3) / 8388608;
      break;
    case 'pcm32':
      for (let i = 0; i < frames; i++) for (let c = 0; c < channels; c++, p += 4) out[c][i] = src.readInt32LE(p) / 2147483648;
      break;
    case 'float32':
      for (let i = 0; i < frames; i++) for (let c = 0; c < channels; c++, p += 4) out[c][i] = src.readFloatLE(p);
      break;
  }
}

/**
 * Streams a WAV file as blocks of `framesPerBlock` frames (the last block may be shorter).
 * Only one block of bytes is held at a time, so recordings of any length can be replayed.
 */
export async function* readWavBlocks(path: string, framesPerBlock: number): AsyncGenerator<RecordingBlock> {
  if (!Number.isInteger(framesPerBlock) || framesPerBlock < 1) {
    throw new RangeError(`framesPerBlock must be a positive integer, got ${framesPerBlock}`);
  }
  const fh = await openForRead(path);
  try {
    const layout = await parseWavHeader(fh, path);
    const info: RecordingInfo = {
      sampleRateHz: layout.sampleRateHz,
      channels: layout.channels,
      frames: layout.frames,
      format: layout.format,
    };
    const bytes = Buffer.alloc(Math.min(layout.frames, framesPerBlock) * layout.blockAlign);
    for (let start = 0; start < layout.frames; start += framesPerBlock) {
      const n = Math.min(framesPerBlock, layout.frames - start);
      const want = n * layout.blockAlign;
      const pos = layout.dataOffset + start * layout.blockAlign;
      let got = 0;
      while (got < want) {
        const { bytesRead } = await fh.read(bytes, got, want - got, pos + got);
        if (bytesRead === 0) throw wavError(path, `file ended at byte ${pos + got} while reading frame ${start}: it was truncated while being read`);
        got += bytesRead;
      }
      const channels = Array.from({ length: layout.channels }, () => new Float32Array(n));
      decodeFrames(bytes, layout.sampleFormat, channels, n);
      yield { info, startFrame: start, t0S: start / layout.sampleRateHz, channels };
    }
  } finally {
    await fh.close();
  }
}

// ---------------------------------------------------------------------------------------------
// Writing

export interface WavWriteOptions {
  sampleRateHz: number;
  channels: number;
  format: WavSampleFormat;
  /** Write a WAVE_FORMAT_EXTENSIBLE fmt chunk instead of the plain one. */
  extensible?: boolean;
}

const BYTES_PER_SAMPLE: Record<WavSampleFormat, number> = { pcm16: 2, pcm24: 3, pcm32: 4, float32: 4 };

/**
 * The header bytes for `frames` frames: RIFF, fmt (16 bytes for PCM, 18 for float, 40 when
 * extensible), a fact chunk for non-PCM formats as the specification asks, then the data chunk
 * header. Its length does not depend on `frames`, so a streaming writer can patch it in place.
 */
export function wavHeader(opts: WavWriteOptions, frames: number): Buffer {
  const bytes = BYTES_PER_SAMPLE[opts.format];
  const tag = opts.format === 'float32' ? FORMAT_IEEE_FLOAT : FORMAT_PCM;
  const fmtSize = opts.extensible ? 40 : tag === FORMAT_PCM ? 16 : 18;
  const withFact = tag !== FORMAT_PCM || opts.extensible === true;
  const blockAlign = opts.channels * bytes;
  const dataBytes = frames * blockAlign;
  const headerBytes = 12 + 8 + fmtSize + (withFact ? 12 : 0) + 8;
  const h = Buffer.alloc(headerBytes);
  let p = 0;
  p += h.write('RIFF', p, 'latin1');
  p = h.writeUInt32LE(headerBytes - 8 + dataBytes + (dataBytes & 1), p);
  p += h.write('WAVE', p, 'latin1');
  p += h.write('fmt ', p, 'latin1');
  p = h.writeUInt32LE(fmtSize, p);
  p = h.writeUInt16LE(opts.extensible ? FORMAT_EXTENSIBLE : tag, p);
  p = h.writeUInt16LE(opts.channels, p);
  p = h.writeUInt32LE(opts.sampleRateHz, p);
  p = h.writeUInt32LE(opts.sampleRateHz * blockAlign, p);
  p = h.writeUInt16LE(blockAlign, p);
  p = h.writeUInt16LE(bytes * 8, p);
  if (fmtSize >= 18) p = h.writeUInt16LE(fmtSize - 18, p);
  if (opts.extensible) {
    p = h.writeUInt16LE(bytes * 8, p); // valid bits
    p = h.writeUInt32LE(0, p); // channel mask: no speaker positions
    p = h.writeUInt16LE(tag, p);
    p += SUBTYPE_GUID_TAIL.copy(h, p);
  }
  if (withFact) {
    p += h.write('fact', p, 'latin1');
    p = h.writeUInt32LE(4, p);
    p = h.writeUInt32LE(frames, p);
  }
  p += h.write('data', p, 'latin1');
  h.writeUInt32LE(dataBytes, p);
  return h;
}

/**
 * Interleaves and encodes `frames` frames into `dst`. Integer PCM scales by 2^(bits-1), rounds,
 * and clamps to the representable range; returns how many samples had to be clamped.
 */
export function encodeFrames(channels: Float32Array[], format: WavSampleFormat, dst: Buffer, frames: number): number {
  const n = channels.length;
  let clipped = 0;
  let p = 0;
  if (format === 'float32') {
    for (let i = 0; i < frames; i++) for (let c = 0; c < n; c++, p += 4) dst.writeFloatLE(channels[c][i], p);
    return 0;
  }
  const bits = BYTES_PER_SAMPLE[format] * 8;
  const full = 2 ** (bits - 1);
  const bytes = bits / 8;
  for (let i = 0; i < frames; i++) {
    for (let c = 0; c < n; c++, p += bytes) {
      let v = Math.round(channels[c][i] * full);
      if (v >= full) {
        clipped++;
        v = full - 1;
      } else if (v < -full) {
        clipped++;
        v = -full;
      } else if (Number.isNaN(v)) {
        clipped++; // a NaN has no integer code: written as 0 and counted with the clamped ones
        v = 0;
      }
      dst.writeIntLE(v, p, bytes);
    }
  }
  return clipped;
}

function checkBlock(channels: Float32Array[], expected: number): number {
  if (channels.length !== expected) throw new RangeError(`expected ${expected} channels, got ${channels.length}`);
  const frames = channels[0]?.length ?? 0;
  for (const ch of channels) {
    if (ch.length !== frames) throw new RangeError(`channels differ in length (${frames} and ${ch.length})`);
  }
  return frames;
}

/** A whole small recording in memory as WAV bytes. */
export function encodeWav(
  channels: Float32Array[],
  sampleRateHz: number,
  format: WavSampleFormat = 'float32',
  extensible = false,
): Buffer {
  if (channels.length < 1) throw new RangeError('encodeWav needs at least one channel');
  const frames = checkBlock(channels, channels.length);
  const opts = { sampleRateHz, channels: channels.length, format, extensible };
  const header = wavHeader(opts, frames);
  const dataBytes = frames * channels.length * BYTES_PER_SAMPLE[format];
  const out = Buffer.alloc(header.length + dataBytes + (dataBytes & 1));
  header.copy(out, 0);
  encodeFrames(channels, format, out.subarray(header.length), frames);
  return out;
}

/**
 * Streams blocks to a WAV file: a placeholder header first, the data appended as it comes, and
 * the header rewritten with the final sizes at `close()`.
 */
export class WavWriter {
  private frames = 0;
  private clipped = 0;
  private scratch = Buffer.alloc(0);
  private closed = false;

  private constructor(
    private readonly fh: FileHandle,
    readonly path: string,
    readonly options: WavWriteOptions,
    private readonly headerBytes: number,
  ) {}

  static async create(path: string, options: WavWriteOptions): Promise<WavWriter> {
    if (!Number.isInteger(options.sampleRateHz) || options.sampleRateHz < 1) {
      throw new RangeError(`WAV sample rate must be a positive integer in Hz, got ${options.sampleRateHz}`);
    }
    if (!Number.isInteger(options.channels) || options.channels < 1 || options.channels > 65535) {
      throw new RangeError(`WAV channel count must be 1..65535, got ${options.channels}`);
    }
    let fh: FileHandle;
    try {
      fh = await open(path, 'w');
    } catch (err) {
      throw new QbandError('QB_E_FILE_WRITE', `${path}: cannot create (${(err as Error).message})`, { cause: err });
    }
    const header = wavHeader(options, 0);
    await fh.write(header, 0, header.length, 0);
    return new WavWriter(fh, path, options, header.length);
  }

  /** Frames written so far. */
  get framesWritten(): number {
    return this.frames;
  }

  /** Samples clamped to the integer range so far (always 0 for float32). */
  get clippedSamples(): number {
    return this.clipped;
  }

  /** Bytes the file will have once closed. */
  get fileBytes(): number {
    const data = this.frames * this.options.channels * BYTES_PER_SAMPLE[this.options.format];
    return this.headerBytes + data + (data & 1);
  }

  async write(channels: Float32Array[]): Promise<void> {
    if (this.closed) throw new Error(`${this.path}: write after close`);
    const frames = checkBlock(channels, this.options.channels);
    const bytes = frames * this.options.channels * BYTES_PER_SAMPLE[this.options.format];
    if (this.scratch.length < bytes) this.scratch = Buffer.alloc(bytes);
    this.clipped += encodeFrames(channels, this.options.format, this.scratch, frames);
    const pos = this.headerBytes + this.frames * this.options.channels * BYTES_PER_SAMPLE[this.options.format];
    await this.fh.write(this.scratch, 0, bytes, pos);
    this.frames += frames;
  }

  async close(): Promise<void> {
    if (this.closed) return;
    this.closed = true;
    try {
      const data = this.frames * this.options.channels * BYTES_PER_SAMPLE[this.options.format];
      if (data & 1) await this.fh.write(Buffer.alloc(1), 0, 1, this.headerBytes + data);
      const header = wavHeader(this.options, this.frames);
      await this.fh.write(header, 0, header.length, 0);
    } finally {
      await this.fh.close();
    }
  }
}
