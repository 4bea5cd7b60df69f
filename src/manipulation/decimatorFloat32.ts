/**
 * The half-band cascade of decimator.ts in float32, for the rolling spectra, whose input,
 * decimated output and FFT are float32 already: the kernel takes the float32 blocks as they are
 * (no widening) and works four outputs a step. Each stage's filter is shaped for its place in
 * the cascade (`stageSideTaps`): the last keeps the 59 taps, earlier ones, whose transition
 * bands are wider, 23 or 19, so the cascade costs about half the arithmetic for the same alias
 * rejection over the kept band. Each product and sum is rounded to float32, in the same order
 * as the float64 stages add theirs. What that costs is measured in test/decimatorFloat32.test.ts
 * against the same filters in float64; the response in test/decimator.test.ts.
 *
 * The WebAssembly stages (halfBand32, halfBand32s6, halfBand32s5 in halfBandKernel.wat) and the
 * JavaScript ones below (where WebAssembly SIMD is missing) compute the same numbers bit for bit.
 * Like the float64 stages, the kernel's work buffers are shared by every cascade (one runs at a
 * time) and each cascade keeps only its stages' histories; everything is allocated in the
 * constructor.
 */
import { stageSideTaps } from './halfBandTaps.ts';
import type { KernelExports, SpectrumKernel } from './spectrumKernel.ts';

/** Inputs per kernel call at most. */
const BLOCK = 2048;
/**
 * Elements past a stage's data that the kernel may read (its phase split reads up to 2 side
 * taps + 3 pairs past the history's start plus the block) or write (three outputs past the last).
 */
const SLACK = 24;
/** The kernel's stage function for each number of side taps. */
const KERNEL_STAGE: Record<number, keyof KernelExports> = { 15: 'halfBand32', 6: 'halfBand32s6', 5: 'halfBand32s5' };

/** One stage's filter: its float32 side taps, its half length (the delay) and its history length. */
interface StageDesign {
  taps: Float32Array;
  half: number;
  history: number;
}

/** The stages of a cascade of `stages` halvings, first to last. */
export function float32Stages(stages: number): StageDesign[] {
  return Array.from({ length: stages }, (_, s) => {
    const taps = Float32Array.from(stageSideTaps(2 ** (stages - s)));
    const half = 2 * taps.length - 1;
    return { taps, half, history: 2 * half };
  });
}

export class Float32Stages {
  /** The cascade's delay in input samples: each stage delays by its half length at its own rate. */
  readonly groupDelayInputSamples: number;
  private readonly design: StageDesign[];
  private readonly kernel: SpectrumKernel | null;
  /** Per stage its last `history` inputs, oldest first. */
  private readonly history: Float32Array[];
  private readonly taps: number[] = [];
  private readonly work: number[] = [];
  private readonly phaseP: number = 0;
  private readonly phaseQ: number = 0;
  private readonly outs: number = 0;
  private heap = new Float32Array(0);
  /** The JavaScript stages' work buffers (history then block), where there is no kernel. */
  private plain: Float32Array[] = [];

  constructor(stages: number, kernel: SpectrumKernel | null) {
    this.design = float32Stages(stages);
    this.groupDelayInputSamples = this.design.reduce((sum, d, s) => sum + d.half * 2 ** s, 0);
    this.kernel = kernel;
    this.history = this.design.map((d) => new Float32Array(d.history));
    if (kernel === null) {
      this.plain = this.design.map((d) => new Float32Array(d.history + 256));
      return;
    }
    this.taps = this.design.map((d) => {
      const key = `halfBand32Taps:${d.taps.length}`;
      const had = kernel.hasShared(key);
      const ptr = kernel.sharedBlock(key, 4 * d.taps.length);
      if (!had) kernel.f32(ptr, d.taps.length).set(d.taps);
      return ptr;
    });
    this.phaseP = kernel.sharedBlock('halfBand32P', 4 * (BLOCK / 2 + 64));
    this.phaseQ = kernel.sharedBlock('halfBand32Q', 4 * (BLOCK / 2 + 64));
    this.outs = kernel.sharedBlock('halfBand32Out', 4 * (BLOCK / 2 + SLACK));
    // Sized for the longest history, so that any cascade can share them.
    const bytes = 4 * (2 * (2 * 15 - 1) + BLOCK + SLACK);
    this.work = this.design.map((_, s) => kernel.sharedBlock(`halfBand32Work:${s}`, bytes));
  }

  clearHistory(): void {
    for (const h of this.history) h.fill(0);
    this.plain.forEach((w, s) => w.fill(0, 0, this.design[s].history));
  }

  /** Filters `input` into `out`, continuing from the last call; `odd` as in decimator.ts. Returns outputs written. */
  process(input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    return this.kernel === null ? this.processPlain(input, out, odd) : this.processKernel(this.kernel, input, out, odd);
  }

  private processKernel(kernel: SpectrumKernel, input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    if (this.heap.buffer !== kernel.memory.buffer) this.heap = new Float32Array(kernel.memory.buffer);
    const heap = this.heap;
    const stages = this.design.length;
    for (let s = 0; s < stages; s++) heap.set(this.history[s], this.work[s] >> 2);
    let written = 0;
    for (let start = 0; start < input.length; start += BLOCK) {
      const block = input.subarray(start, Math.min(input.length, start + BLOCK));
      heap.set(block, (this.work[0] >> 2) + this.design[0].history);
      let count = block.length;
      for (let s = 0; s < stages; s++) {
        const w = this.work[s];
        const h = this.design[s].history;
        const dest = s === stages - 1 ? this.outs : this.work[s + 1] + 4 * this.design[s + 1].history;
        const stage = kernel.fn[KERNEL_STAGE[this.design[s].taps.length]] as KernelExports['halfBand32'];
        const m = stage(w, count, odd[s] === 1 ? 0 : 1, dest, this.taps[s], this.phaseP, this.phaseQ);
        odd[s] = (odd[s] + count) & 1;
        heap.copyWithin(w >> 2, (w >> 2) + count, (w >> 2) + count + h);
        count = m;
      }
      out.set(heap.subarray(this.outs >> 2, (this.outs >> 2) + count), written);
      written += count;
    }
    for (let s = 0; s < stages; s++) this.history[s].set(heap.subarray(this.work[s] >> 2, (this.work[s] >> 2) + this.design[s].history));
    return written;
  }

  private processPlain(input: Float32Array, out: Float32Array, odd: Uint8Array): number {
    const n = input.length;
    if (this.plain[0].length < this.design[0].history + n) {
      this.plain = this.plain.map((w, s) => {
        const bigger = new Float32Array(this.design[s].history + n);
        bigger.set(w.subarray(0, this.design[s].history));
        return bigger;
      });
    }
    const f = Math.fround;
    let count = n;
    let written = 0;
    this.plain[0].set(input, this.design[0].history);
    for (let s = 0; s < this.design.length; s++) {
      const { taps: h, half, history: H } = this.design[s];
      const buf = this.plain[s];
      const last = s === this.design.length - 1;
      const next = last ? null : this.plain[s + 1];
      const nextH = last ? 0 : this.design[s + 1].history;
      let m = 0;
      for (let i = odd[s] === 1 ? 0 : 1; i < count; i += 2) {
        const c = H + i - half;
        let acc = f(0.5 * buf[c]);
        for (let j = 0; j < h.length; j++) {
          const d = 2 * j + 1;
          acc = f(acc + f(h[j] * f(buf[c - d] + buf[c + d])));
        }
        if (next !== null) next[nextH + m] = acc;
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
