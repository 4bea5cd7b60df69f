/**
 * The half-band cascade of decimator.ts in float32: the same filter (its side taps rounded to
 * float32) and the same sums in the same order, each product and sum rounded to float32. For
 * the rolling spectra, whose input, decimated output and FFT are float32 already: the kernel
 * takes the float32 blocks as they are (no widening) and works four outputs a step instead of
 * two. What rounding to float32 at every step costs is measured in test/decimatorFloat32.test.ts
 * against the float64 cascade.
 *
 * The WebAssembly stages (halfBand32 in spectrumKernel.wat) and the JavaScript ones below (where
 * WebAssembly SIMD is missing) compute the same numbers bit for bit. Like the float64 stages,
 * the kernel's work buffers are shared by every cascade (one runs at a time) and each cascade
 * keeps only its stages' histories; everything is allocated in the constructor.
 */
import { HALF, SIDE_TAPS_F32, TAPS } from './halfBandTaps.ts';
import type { SpectrumKernel } from './spectrumKernel.ts';

/** Inputs per kernel call at most. */
const BLOCK = 2048;
/**
 * Elements past a stage's data that the kernel may read (its phase split reads up to 72 past
 * the history's start plus the block) or write (up to three outputs past the last).
 */
const SLACK = 24;
const H = TAPS - 1;

export class Float32Stages {
  private readonly stages: number;
  private readonly kernel: SpectrumKernel | null;
  /** Per stage its last H inputs, oldest first. */
  private readonly history: Float32Array;
  private readonly taps: number = 0;
  private readonly work: number[] = [];
  private readonly phaseP: number = 0;
  private readonly phaseQ: number = 0;
  private readonly outs: number = 0;
  private heap = new Float32Array(0);
  /** The JavaScript stages' work buffers (history then block), where there is no kernel. */
  private plain: Float32Array[] = [];

  constructor(stages: number, kernel: SpectrumKernel | null) {
    this.stages = stages;
    this.kernel = kernel;
    this.history = new Float32Array(stages * H);
    if (kernel === null) {
      this.plain = Array.from({ length: stages }, () => new Float32Array(H + 256));
      return;
    }
    const had = kernel.hasShared('halfBand32Taps');
    this.taps = kernel.sharedBlock('halfBand32Taps', 4 * SIDE_TAPS_F32.length);
    this.phaseP = kernel.sharedBlock('halfBand32P', 4 * (BLOCK / 2 + 64));
    this.phaseQ = kernel.sharedBlock('halfBand32Q', 4 * (BLOCK / 2 + 64));
    this.outs = kernel.sharedBlock('halfBand32Out', 4 * (BLOCK / 2 + SLACK));
    const bytes = 4 * (H + BLOCK + SLACK);
    this.work = Array.from({ length: stages }, (_, s) => kernel.sharedBlock(`halfBand32Work:${s}`, bytes));
    if (!had) kernel.f32(this.taps, SIDE_TAPS_F32.length).set(SIDE_TAPS_F32);
  }

  clearHistory(): void {
    this.history.fill(0);
    for (const w of this.plain) w.fill(0, 0, H);
  }

  /** Filters `input` into `out`, continuing from the last call; `odd` as in decimator.ts. Returns outputs written. */
  process(input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    return this.kernel === null ? this.processPlain(input, out, odd) : this.processKernel(this.kernel, input, out, odd);
  }

  private processKernel(kernel: SpectrumKernel, input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    if (this.heap.buffer !== kernel.memory.buffer) this.heap = new Float32Array(kernel.memory.buffer);
    const heap = this.heap;
    const halfBand32 = kernel.fn.halfBand32;
    for (let s = 0; s < this.stages; s++) heap.set(this.history.subarray(s * H, (s + 1) * H), this.work[s] >> 2);
    let written = 0;
    for (let start = 0; start < input.length; start += BLOCK) {
      const block = input.subarray(start, Math.min(input.length, start + BLOCK));
      heap.set(block, (this.work[0] >> 2) + H);
      let count = block.length;
      for (let s = 0; s < this.stages; s++) {
        const w = this.work[s];
        const dest = s === this.stages - 1 ? this.outs : this.work[s + 1] + 4 * H;
        const m = halfBand32(w, count, odd[s] === 1 ? 0 : 1, dest, this.taps, this.phaseP, this.phaseQ);
        odd[s] = (odd[s] + count) & 1;
        heap.copyWithin(w >> 2, (w >> 2) + count, (w >> 2) + count + H);
        count = m;
      }
      out.set(heap.subarray(this.outs >> 2, (this.outs >> 2) + count), written);
      written += count;
    }
    for (let s = 0; s < this.stages; s++) this.history.set(heap.subarray(this.work[s] >> 2, (this.work[s] >> 2) + H), s * H);
    return written;
  }

  private processPlain(input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    const n = input.length;
    if (this.plain[0].length < H + n) {
      this.plain = this.plain.map((w) => {
        const bigger = new Float32Array(H + n);
        bigger.set(w.subarray(0, H));
        return bigger;
      });
    }
    const h = SIDE_TAPS_F32;
    const f = Math.fround;
    let count = n;
    let written = 0;
    this.plain[0].set(input, H);
    for (let s = 0; s < this.stages; s++) {
      const buf = this.plain[s];
      const last = s === this.stages - 1;
      const next = last ? null : this.plain[s + 1];
      let m = 0;
      for (let i = odd[s] === 1 ? 0 : 1; i < count; i += 2) {
        const c = H + i - HALF;
        let acc = f(0.5 * buf[c]);
        for (let j = 0; j < h.length; j++) {
          const d = 2 * j + 1;
          acc = f(acc + f(h[j] * f(buf[c - d] + buf[c + d])));
        }
        if (next !== null) next[H + m] = acc;
        else out[m] = acc;
        m++;
      }
      odd[s] = (odd[s] + count) & 1;
      buf.copyWithin(0, count, count + H);
      if (last) written = m;
      count = m;
    }
    return written;
  }
}
