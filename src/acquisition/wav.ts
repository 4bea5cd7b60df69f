/**
 * Reading RIFF/WAVE recordings: header parsing and a streaming block reader (the layout is
 * described in wavFormat.ts; writing is in wavWriter.ts).
 *
 * Read here: integer PCM of 16, 24 and 32 bits, 32-bit IEEE float, and WAVE_FORMAT_EXTENSIBLE
 * whose sub-format is one of those. Everything else is refused with QB_E_WAV_FORMAT naming what
 * was found. Integer PCM is normalised to [-1, 1) by dividing by 2^(bits-1). What a file may
 * ask of the reader is bounded (recordingLimits.ts): its sample rate and channel count, the
 * chunks walked before the data (MAX_HEADER_CHUNKS) and the bytes read at once
 * (MAX_READ_BYTES); only the channels asked for are decoded.
 */
import { open, type FileHandle } from 'node:fs/promises';
import { QbandError } from '../errors.ts';
import { printable, quote } from '../text/printable.ts';
import { checkChannelCount, checkSampleRate, isUsableSample, MAX_SAMPLE_ABS } from './recordingLimits.ts';
import {
  FORMAT_EXTENSIBLE,
  FORMAT_IEEE_FLOAT,
  FORMAT_PCM,
  SUBTYPE_GUID_TAIL,
  type RecordingBlock,
  type RecordingInfo,
  type WavSampleFormat,
} from './wavFormat.ts';
import { ReadAhead, type ReadChunk } from './readAhead.ts';
import { READ_LEAD, releaseWavDecoder, wavDecoder, type WavDecoder } from './wavKernel.ts';

export type { RecordingBlock, RecordingInfo, WavSampleFormat } from './wavFormat.ts';
export { encodeFrames, encodeWav, wavHeader, WavWriter, type WavWriteOptions } from './wavWriter.ts';

/** What the header says, plus where the samples are. */
export interface WavLayout extends RecordingInfo {
  sampleFormat: WavSampleFormat;
  blockAlign: number;
  dataOffset: number;
  dataBytes: number;
}

/** Chunks walked before the data chunk: real files have a handful (fmt, fact, LIST, ...). */
export const MAX_HEADER_CHUNKS = 1024;
/** Bytes read from the file at once, whatever the block size and channel count. */
const MAX_READ_BYTES = 4 * 2 ** 20;
/** Bytes read at once when blocks are smaller (bounded by MAX_READ_BYTES all the same). */
const READ_AHEAD_BYTES = 2 ** 20;
/** A read-ahead slot: a decoder's memory, or a Buffer where the decoder cannot run. */
interface WavSlot {
  readonly decoder: WavDecoder | null;
  readonly fallback: Buffer | null;
  readonly bytes: Uint8Array;
}
/** Stands for a channel that was not asked for. */
const NOT_DECODED = new Float32Array(0);

function wavError(name: string, what: string): QbandError {
  return new QbandError('QB_E_WAV_FORMAT', `${printable(name, 200)}: ${what}`);
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
  return quote(id.toString('latin1'));
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
  for (let chunks = 0; pos + 8 <= fileBytes; chunks++) {
    if (chunks === MAX_HEADER_CHUNKS) {
      throw wavError(name, `more than ${MAX_HEADER_CHUNKS} chunks before the data chunk: not a recording qband reads (corrupt or padded header?)`);
    }
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
  checkChannelCount(channels, printable(name, 200), 'QB_E_WAV_FORMAT');
  checkSampleRate(sampleRateHz, printable(name, 200), 'QB_E_WAV_FORMAT');
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
    const errno = (err as NodeJS.ErrnoException).code ?? (err as Error).message;
    throw new QbandError('QB_E_FILE_READ', `${printable(path, 200)}: cannot open (${errno})`, { cause: err });
  }
}

/**
 * De-interleaves `frames` frames of `channelCount` channels from `src` into `out[c]` for each
 * channel c in `selected` (every channel when absent), normalising integer PCM. A decoded
 * float sample that is not usable becomes NaN; returns how many did.
 */
const LITTLE_ENDIAN_HOST = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

export function decodeFrames(
  src: Buffer,
  sampleFormat: WavSampleFormat,
  out: Float32Array[],
  frames: number,
  channelCount = out.length,
  selected: readonly number[] = out.map((_, c) => c),
): number {
  const bytes = sampleFormat === 'pcm16' ? 2 : sampleFormat === 'pcm24' ? 3 : 4;
  const stride = channelCount * bytes;
  let unusable = 0;
  for (const c of selected) {
    const dst = out[c];
    let p = c * bytes;
    switch (sampleFormat) {
      case 'pcm16':
        for (let i = 0; i < frames; i++, p += stride) dst[i] = src.readInt16LE(p) / 32768;
        break;
      case 'pcm24':
        // readIntLE(.., 3) sign-extends bit 23.
        for (let i = 0; i < frames; i++, p += stride) dst[i] = src.readIntLE(p, 3) / 8388608;
        break;
      case 'pcm32':
        for (let i = 0; i < frames; i++, p += stride) dst[i] = src.readInt32LE(p) / 2147483648;
        break;
      case 'float32':
        if (LITTLE_ENDIAN_HOST && src.byteOffset % 4 === 0) {
          // The bytes are the host's float32s: read them through a view, not one call per sample.
          const f = new Float32Array(src.buffer, src.byteOffset, frames * channelCount);
          if (channelCount === 1) {
            // One channel: copy at once, then mark what is out of bounds.
            dst.set(f.subarray(0, frames));
            for (let i = 0; i < frames; i++) {
              const x = dst[i];
              if (!(x >= -MAX_SAMPLE_ABS && x <= MAX_SAMPLE_ABS)) {
                dst[i] = Number.NaN;
                unusable++;
              }
            }
            break;
          }
          for (let i = 0, q = c; i < frames; i++, q += channelCount) {
            const x = f[q];
            if (x >= -MAX_SAMPLE_ABS && x <= MAX_SAMPLE_ABS) dst[i] = x;
            else {
              dst[i] = Number.NaN;
              unusable++;
            }
          }
          break;
        }
        for (let i = 0; i < frames; i++, p += stride) {
          const x = src.readFloatLE(p);
          if (isUsableSample(x)) dst[i] = x;
          else {
            dst[i] = Number.NaN;
            unusable++;
          }
        }
        break;
    }
  }
  return unusable;
}

/**
 * Streams a WAV file as blocks of `framesPerBlock` frames (the last block may be shorter),
 * decoding only the channels in `selected` (all when absent; channels beyond the file's are
 * ignored). At most two reads of MAX_READ_BYTES are held at a time (the chunk being decoded and
 * the one read ahead), so recordings of any length and width can be replayed. With
 * `reuseArrays`, every block's sample arrays are those of the block before (overwritten): for
 * a consumer that is done with a block before it asks for the next and keeps no reference to its
 * arrays, as the engine (samplePool.ts says why); it spares a fresh array per channel and block,
 * memory outside the heap that the garbage collector would chase.
 */
export async function* readWavBlocks(
  path: string,
  framesPerBlock: number,
  selected?: readonly number[],
  reuseArrays = false,
): AsyncGenerator<RecordingBlock> {
  if (!Number.isInteger(framesPerBlock) || framesPerBlock < 1) {
    throw new RangeError(`framesPerBlock must be a positive integer, got ${framesPerBlock}`);
  }
  const fh = await openForRead(path);
  let slots: [WavSlot, WavSlot] | null = null;
  let ahead: ReadAhead<WavSlot> | null = null;
  try {
    const layout = await parseWavHeader(fh, path);
    const info: RecordingInfo = {
      sampleRateHz: layout.sampleRateHz,
      channels: layout.channels,
      frames: layout.frames,
      format: layout.format,
    };
    const wanted = [...new Set(selected ?? Array.from({ length: layout.channels }, (_, c) => c))]
      .filter((c) => Number.isInteger(c) && c >= 0 && c < layout.channels)
      .sort((a, b) => a - b);
    // Reads run ahead of the blocks, READ_AHEAD_BYTES at a time (whole frames, at least one), so a
    // replay in small blocks does not wait on one read per block; and one read ahead of the
    // decoding (readAhead.ts), into the other of two slots.
    const framesPerRead = Math.max(1, Math.floor(Math.max(READ_AHEAD_BYTES, Math.min(framesPerBlock * layout.blockAlign, MAX_READ_BYTES)) / layout.blockAlign));
    // The bytes are read into a WebAssembly decoder's memory and decoded there (wavKernel.ts),
    // or, where it cannot run, into a Buffer that decodeFrames reads.
    const readFrames = Math.min(layout.frames, framesPerRead);
    const slot = (): WavSlot => {
      const decoder = wanted.length > 0 ? wavDecoder(readFrames * layout.blockAlign, readFrames) : null;
      const fallback = decoder === null ? Buffer.alloc(readFrames * layout.blockAlign) : null;
      return { decoder, fallback, bytes: decoder?.bytes ?? (fallback as Buffer) };
    };
    slots = [slot(), slot()];
    ahead = new ReadAhead(fh, slots, {
      dataOffset: layout.dataOffset,
      blockAlign: layout.blockAlign,
      frames: layout.frames,
      framesPerRead,
      leadOf: (position, { decoder }) => (decoder !== null ? position % READ_LEAD : 0), // see READ_LEAD
      truncated: (position, frame) => wavError(path, `file ended at byte ${position} while reading frame ${frame}: it was truncated while being read`),
    });
    const reader = ahead;
    let chunk: ReadChunk<WavSlot> | null = null;
    let kept: Float32Array<ArrayBuffer>[] = [];
    for (let start = 0; start < layout.frames; start += framesPerBlock) {
      const n = Math.min(framesPerBlock, layout.frames - start);
      const channels = Array.from({ length: layout.channels }, () => NOT_DECODED);
      if (!reuseArrays || kept.length === 0 || kept[0].length !== n) kept = wanted.map(() => new Float32Array(n));
      wanted.forEach((c, i) => (channels[c] = kept[i]));
      let unusableSamples = 0;
      for (let done = 0; done < n; ) {
        const frame = start + done;
        if (chunk === null || frame >= chunk.frame + chunk.count) chunk = await reader.chunkAt(frame);
        const m = Math.min(n - done, chunk.frame + chunk.count - frame);
        const from = chunk.lead + (frame - chunk.frame) * layout.blockAlign;
        const { decoder, fallback } = chunk.slot;
        if (decoder !== null) {
          for (let i = 0; i < wanted.length; i++) {
            unusableSamples += decoder.decode(layout.sampleFormat, from, m, layout.channels, wanted[i], kept[i], done);
          }
        } else if (fallback !== null) {
          const views = channels.map((ch) => (ch.length === 0 ? ch : ch.subarray(done, done + m)));
          unusableSamples += decodeFrames(fallback.subarray(from, from + m * layout.blockAlign), layout.sampleFormat, views, m, layout.channels, wanted);
        }
        done += m;
      }
      yield { info, startFrame: start, t0S: start / layout.sampleRateHz, channels, unusableSamples };
    }
  } finally {
    // A read ahead may still be in flight (the reader stopped early, or a read failed): wait
    // for it before its slot's decoder goes to the next reader and the file is closed.
    await ahead?.settle();
    for (const { decoder } of slots ?? []) if (decoder !== null) releaseWavDecoder(decoder);
    await fh.close();
  }
}
