/**
 * Writing WAV recordings: the header, the interleaving encoder, a whole small file in memory,
 * and a streaming writer (the layout is described in wavFormat.ts).
 */
import { open, type FileHandle } from 'node:fs/promises';
import { QbandError } from '../errors.ts';
import { printable } from '../text/printable.ts';
import {
  BYTES_PER_SAMPLE,
  FORMAT_EXTENSIBLE,
  FORMAT_IEEE_FLOAT,
  FORMAT_PCM,
  SUBTYPE_GUID_TAIL,
  type WavSampleFormat,
} from './wavFormat.ts';

export interface WavWriteOptions {
  sampleRateHz: number;
  channels: number;
  format: WavSampleFormat;
  /** Write a WAVE_FORMAT_EXTENSIBLE fmt chunk instead of the plain one. */
  extensible?: boolean;
}

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
      throw writeError(path, 'cannot create', err);
    }
    const header = wavHeader(options, 0);
    try {
      await fh.write(header, 0, header.length, 0);
    } catch (err) {
      await fh.close();
      throw writeError(path, 'cannot write', err);
    }
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
    try {
      await this.fh.write(this.scratch, 0, bytes, pos);
    } catch (err) {
      throw writeError(this.path, 'cannot write', err);
    }
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
    } catch (err) {
      throw writeError(this.path, 'cannot write', err);
    } finally {
      await this.fh.close();
    }
  }
}

function writeError(path: string, what: string, err: unknown): QbandError {
  const reason = (err as NodeJS.ErrnoException).code ?? (err as Error).message;
  return new QbandError('QB_E_FILE_WRITE', `${printable(path, 200)}: ${what} (${reason})`, { cause: err });
}
