/**
 * De-interleaving WAV frames in WebAssembly (wavKernel.wat, SIMD for float32 of one or two
 * channels): a reader's file bytes are read straight into the kernel's memory and each channel is
 * decoded there, then copied into its block array. The module is compiled once per process (per
 * worker thread); every reader has its own instance and memory, sized when the reader starts and
 * never grown, so a read in flight always lands in memory that stays put. A reader that finishes
 * gives its decoder back, and the next reader of the same sizes takes it (at most two are kept:
 * replay and identify read one recording at a time, and a fresh memory costs page faults).
 *
 * The live path's binary sample blocks use one more instance (samplePayload.ts): its float32
 * decoder, with a stride of one sample, is a copy that checks the agent's bound on the way.
 *
 * Where WebAssembly SIMD is missing, `wavDecoder` returns null and wav.ts decodes in JavaScript
 * (`decodeFrames`), which gives the same samples (test/wavKernel.test.ts checks both against a plain
 * decoder).
 */
import type { WavSampleFormat } from './wavFormat.ts';
import { WAV_KERNEL_WASM_BASE64 } from './wavKernelWasm.ts';

type DecodeFn = (src: number, stride: number, frames: number, dst: number) => number;

const PAGE = 65536;
/** Where the file's bytes start in the memory (a page boundary); the room after them for the SIMD loads. */
const BYTES_AT = 0;
const SLACK = 64;
/**
 * A read of file position p lands `p % READ_LEAD` bytes into `bytes`, at the same offset within
 * a page as its source in the file cache: the kernel's copy into a destination a few bytes past
 * its source's offset within a page took about three times the CPU on the development machine
 * (its loads wait on the stores just made, whose addresses match in their low 12 bits).
 */
export const READ_LEAD = 4096;

let compiled: WebAssembly.Module | null | undefined;

function kernelModule(): WebAssembly.Module | null {
  if (compiled === undefined) {
    const bytes = Uint8Array.from(atob(WAV_KERNEL_WASM_BASE64), (c) => c.charCodeAt(0));
    compiled = WebAssembly.validate(bytes) ? new WebAssembly.Module(bytes) : null;
  }
  return compiled;
}

export class WavDecoder {
  /** Where the reader puts the file's bytes: room for `readBytes` after a lead of up to READ_LEAD. */
  readonly bytes: Uint8Array;
  readonly readBytes: number;
  readonly maxFrames: number;
  private readonly out: Float32Array;
  private readonly outAt: number;
  private readonly fns: Record<WavSampleFormat, DecodeFn>;

  /** Room for `readBytes` bytes of frames at a time, decoded `maxFrames` frames at a time at most. */
  constructor(module: WebAssembly.Module, readBytes: number, maxFrames: number) {
    const exports = new WebAssembly.Instance(module, {}).exports;
    const memory = exports.memory as WebAssembly.Memory;
    this.outAt = (BYTES_AT + READ_LEAD + readBytes + SLACK + 15) & ~15;
    const need = Math.ceil((this.outAt + 4 * maxFrames) / PAGE) - memory.buffer.byteLength / PAGE;
    if (need > 0) memory.grow(need);
    this.bytes = new Uint8Array(memory.buffer, BYTES_AT, READ_LEAD + readBytes);
    this.readBytes = readBytes;
    this.out = new Float32Array(memory.buffer, this.outAt, maxFrames);
    this.maxFrames = maxFrames;
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

/** Decoders given back by readers that finished, for the next reader of the same sizes. */
const idle: WavDecoder[] = [];
const IDLE_MAX = 2;

/**
 * A decoder for one reader (one given back by a reader that finished, when one of these sizes is
 * idle), or null where this WebAssembly has no SIMD. Give it back with `releaseWavDecoder` once
 * no read into it is in flight.
 */
export function wavDecoder(readBytes: number, maxFrames: number): WavDecoder | null {
  const at = idle.findIndex((d) => d.readBytes === readBytes && d.maxFrames === maxFrames);
  if (at >= 0) return idle.splice(at, 1)[0];
  const module = kernelModule();
  return module === null ? null : new WavDecoder(module, readBytes, maxFrames);
}

/** Keeps `decoder` for the next reader (a few at most; the others go to the garbage collector). */
export function releaseWavDecoder(decoder: WavDecoder): void {
  if (idle.length === IDLE_MAX) idle.shift();
  idle.push(decoder);
}
