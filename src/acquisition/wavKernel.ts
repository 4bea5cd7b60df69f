/**
 * De-interleaving WAV frames in WebAssembly (wavKernel.wat, SIMD for float32 of one or two
 * channels): a reader's file bytes are read straight into the kernel's memory and each channel is
 * decoded there, then copied into its block array. The module is compiled once per process (per
 * worker thread); every reader has its own instance and memory, sized when the reader starts and
 * never grown, so a read in flight always lands in memory that stays put.
 *
 * Where WebAssembly SIMD is missing, `wavDecoder` returns null and wav.ts decodes in JavaScript
 * (`decodeFrames`), which gives the same samples (test/wavKernel.test.ts checks both against a plain
 * decoder).
 */
import type { WavSampleFormat } from './wavFormat.ts';
import { WAV_KERNEL_WASM_BASE64 } from './wavKernelWasm.ts';

type DecodeFn = (src: number, stride: number, frames: number, dst: number) => number;

const PAGE = 65536;
/** Where the file's bytes start in the memory, and the room left after them for the SIMD loads. */
const BYTES_AT = 64;
const SLACK = 64;

let compiled: WebAssembly.Module | null | undefined;

function kernelModule(): WebAssembly.Module | null {
  if (compiled === undefined) {
    const bytes = Uint8Array.from(atob(WAV_KERNEL_WASM_BASE64), (c) => c.charCodeAt(0));
    compiled = WebAssembly.validate(bytes) ? new WebAssembly.Module(bytes) : null;
  }
  return compiled;
}

export class WavDecoder {
  /** Where the reader puts the file's bytes: room for `readBytes`. */
  readonly bytes: Uint8Array;
  private readonly out: Float32Array;
  private readonly outAt: number;
  private readonly fns: Record<WavSampleFormat, DecodeFn>;

  /** Room for `readBytes` bytes of frames at a time, decoded `maxFrames` frames at a time at most. */
  constructor(module: WebAssembly.Module, readBytes: number, maxFrames: number) {
    const exports = new WebAssembly.Instance(module, {}).exports;
    const memory = exports.memory as WebAssembly.Memory;
    this.outAt = (BYTES_AT + readBytes + SLACK + 15) & ~15;
    const need = Math.ceil((this.outAt + 4 * maxFrames) / PAGE) - memory.buffer.byteLength / PAGE;
    if (need > 0) memory.grow(need);
    this.bytes = new Uint8Array(memory.buffer, BYTES_AT, readBytes);
    this.out = new Float32Array(memory.buffer, this.outAt, maxFrames);
    this.fns = {
      pcm16: exports.pcm16 as DecodeFn,
      pcm24: exports.pcm24 as DecodeFn,
      pcm32: exports.pcm32 as DecodeFn,
      float32: exports.float32 as DecodeFn,
    };
  }

  /**
   * Decodes channel `channel` of `frames` frames of `channelCount` channels starting at byte
   * `fromByte` of `bytes` into dst[at..at+frames); returns how many samples were unusable (NaN).
   */
  decode(format: WavSampleFormat, fromByte: number, frames: number, channelCount: number, channel: number, dst: Float32Array, at: number): number {
    const size = format === 'pcm16' ? 2 : format === 'pcm24' ? 3 : 4;
    const unusable = this.fns[format](BYTES_AT + fromByte + channel * size, channelCount * size, frames, this.outAt);
    dst.set(frames === this.out.length ? this.out : this.out.subarray(0, frames), at);
    return unusable;
  }
}

/** A decoder for one reader, or null where this WebAssembly has no SIMD. */
export function wavDecoder(readBytes: number, maxFrames: number): WavDecoder | null {
  const module = kernelModule();
  return module === null ? null : new WavDecoder(module, readBytes, maxFrames);
}
