import { readFileSync, mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { SeededRandom } from '../src/simulation/prng.ts';
import { compileKernel } from '../scripts/compileKernel.ts';
import { decodeFrames, readWavBlocks, wavHeader, type WavSampleFormat } from '../src/acquisition/wav.ts';
import { wavDecoder } from '../src/acquisition/wavKernel.ts';
import { WAV_KERNEL_WASM_BASE64 } from '../src/acquisition/wavKernelWasm.ts';

const FORMATS: WavSampleFormat[] = ['pcm16', 'pcm24', 'pcm32', 'float32'];
const SIZE: Record<WavSampleFormat, number> = { pcm16: 2, pcm24: 3, pcm32: 4, float32: 4 };

/**
 * The plain decoder the fast paths must match bit for bit: one sample at a time through a
 * DataView, integer PCM divided by 2^(bits-1) and stored into a Float32Array, a float sample
 * outside [-1e6, 1e6] or not finite replaced by NaN and counted.
 */
function referenceDecode(bytes: Uint8Array, format: WavSampleFormat, channels: number, frames: number): { out: Float32Array[]; unusable: number } {
  const dv = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  const out = Array.from({ length: channels }, () => new Float32Array(frames));
  let unusable = 0;
  for (let f = 0; f < frames; f++) {
    for (let c = 0; c < channels; c++) {
      const p = (f * channels + c) * SIZE[format];
      let v: number;
      if (format === 'pcm16') v = dv.getInt16(p, true) / 32768;
      else if (format === 'pcm24') v = (dv.getUint8(p) | (dv.getUint8(p + 1) << 8) | (dv.getInt8(p + 2) << 16)) / 8388608;
      else if (format === 'pcm32') v = dv.getInt32(p, true) / 2147483648;
      else {
        v = dv.getFloat32(p, true);
        if (!(Math.abs(v) <= 1e6)) {
          v = Number.NaN;
          unusable++;
        }
      }
      out[c][f] = v;
    }
  }
  return { out, unusable };
}

/** Deterministic uniform numbers in [0, 1), so a failure can be replayed. */
function uniform(seed: number): () => number {
  const random = new SeededRandom(seed);
  return () => random.uniform();
}

/** Random bytes; for float32 a mix of ordinary, edge and unusable values (and random bit patterns). */
function frameBytes(format: WavSampleFormat, channels: number, frames: number, seed: number): Uint8Array {
  const rnd = uniform(seed);
  const bytes = new Uint8Array(frames * channels * SIZE[format]);
  for (let i = 0; i < bytes.length; i++) bytes[i] = Math.floor(rnd() * 256);
  if (format === 'float32') {
    const specials = [0, -0, 1e6, -1e6, Math.fround(1e6 * (1 + 2 ** -23)), -Math.fround(1e6 * (1 + 2 ** -23)), 1e-45, -1e-45, Number.NaN, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY, 3.4e38];
    const dv = new DataView(bytes.buffer);
    for (let p = 0; p < bytes.length; p += 4) {
      const r = rnd();
      if (r < 0.3) dv.setFloat32(p, specials[Math.floor(rnd() * specials.length)], true);
      else if (r < 0.8) dv.setFloat32(p, (rnd() * 2 - 1) * 10 ** (rnd() * 8 - 4), true);
      // else: a random bit pattern (NaNs with payloads, huge and tiny values)
    }
  }
  return bytes;
}

const bits = (x: Float32Array): Uint32Array => new Uint32Array(x.buffer, x.byteOffset, x.length);

describe('WAV decoding kernel (WebAssembly SIMD) and the JavaScript decoder', () => {
  it('is the committed compilation of wavKernel.wat', async () => {
    const wat = readFileSync(new URL('../src/acquisition/wavKernel.wat', import.meta.url), 'utf8');
    const bytes = await compileKernel(wat);
    expect(Buffer.from(bytes).toString('base64')).toBe(WAV_KERNEL_WASM_BASE64);
  });

  for (const format of FORMATS) {
    it(`${format}: both decode every channel of 1 to 5 bit for bit as the plain decoder, any frame count`, () => {
      let seed = 1;
      for (let channels = 1; channels <= 5; channels++) {
        for (const frames of [0, 1, 2, 3, 4, 5, 7, 8, 9, 31, 33, 1001]) {
          const bytes = frameBytes(format, channels, frames, seed++);
          const want = referenceDecode(bytes, format, channels, frames);
          // The kernel, from an odd byte offset into its memory, into arrays at an offset.
          const decoder = wavDecoder(bytes.length + 3, frames + 5);
          expect(decoder).not.toBeNull();
          if (decoder === null) return;
          decoder.bytes.set(bytes, 3);
          let unusable = 0;
          for (let c = 0; c < channels; c++) {
            const dst = new Float32Array(frames + 2).fill(7);
            unusable += decoder.decode(format, 3, frames, channels, c, dst, 2);
            expect(bits(dst.subarray(2)), `${channels} ch, ${frames} frames, channel ${c}`).toEqual(bits(want.out[c]));
            expect(Array.from(dst.subarray(0, 2))).toEqual([7, 7]);
          }
          expect(unusable).toBe(want.unusable);
          // The JavaScript decoder, every channel and a selection.
          const js = Array.from({ length: channels }, () => new Float32Array(frames));
          expect(decodeFrames(Buffer.from(bytes), format, js, frames)).toBe(want.unusable);
          for (let c = 0; c < channels; c++) expect(bits(js[c])).toEqual(bits(want.out[c]));
        }
      }
    });
  }

  it('readWavBlocks gives the plain decoder\'s samples and unusable counts over any block size', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'qband-wavkernel-'));
    let seed = 100;
    for (const format of FORMATS) {
      for (const channels of [1, 2, 3]) {
        const frames = 5003;
        const data = frameBytes(format, channels, frames, seed++);
        const path = join(dir, `${format}-${channels}.wav`);
        writeFileSync(path, Buffer.concat([wavHeader({ sampleRateHz: 8000, channels, format }, frames), data]));
        const want = referenceDecode(data, format, channels, frames);
        for (const [block, selected] of [[1, undefined], [7, [channels - 1]], [4096, undefined], [10_000, [0]]] as const) {
          const got = Array.from({ length: channels }, () => new Float32Array(frames));
          let unusable = 0;
          for await (const b of readWavBlocks(path, block, selected, true)) {
            b.channels.forEach((x, c) => got[c].set(x, b.startFrame));
            unusable += b.unusableSamples;
          }
          const chosen = selected ?? Array.from({ length: channels }, (_, c) => c);
          for (const c of chosen) expect(bits(got[c]), `${format} ${channels} ch, blocks of ${block}, channel ${c}`).toEqual(bits(want.out[c]));
          const wantUnusable = format === 'float32' ? chosen.reduce((n, c) => n + want.out[c].filter((v) => Number.isNaN(v)).length, 0) : 0;
          expect(unusable).toBe(wantUnusable);
        }
      }
    }
    expect(seed).toBe(112);
  });
});
