import { readFileSync } from 'node:fs';
import { afterEach, describe, expect, it, vi } from 'vitest';
import { SeededRandom } from '../src/simulation/prng.ts';
import { compileKernel } from '../scripts/compileKernel.ts';
import { TachSpeed } from '../src/manipulation/speedFromTach.ts';
import { TACH_KERNEL_CHUNK, tachKernel } from '../src/manipulation/tachKernel.ts';
import { TACH_KERNEL_WASM_BASE64 } from '../src/manipulation/tachKernelWasm.ts';

/**
 * The tach edge detector's loop as it was written in JavaScript before it moved into the kernel,
 * sample by sample: the reference the kernel must match bit for bit (every edge's time, and the
 * detector's state after every block).
 */
interface RefState {
  hi: number;
  lo: number;
  prevX: number;
  state: number;
  crossingS: number;
}

function referenceBlock(s: RefState, samples: Float32Array, first: number, originS: number, dtS: number, relax: number, warmup: number, edges: number[]): void {
  for (let i = 0; i < samples.length; i++) {
    const x = samples[i];
    const n = first + i;
    if (!Number.isFinite(x)) {
      s.prevX = Number.NaN;
      s.crossingS = Number.NaN;
      continue;
    }
    if (n === 0) {
      s.hi = x;
      s.lo = x;
    } else {
      const span = s.hi - s.lo;
      s.hi = x > s.hi ? x : s.hi - span * relax;
      s.lo = x < s.lo ? x : s.lo + span * relax;
    }
    const span = s.hi - s.lo;
    if (span > 0) {
      const mid = s.lo + 0.5 * span;
      if (s.state !== 2 && !Number.isNaN(s.prevX) && s.prevX < mid && x >= mid) {
        const frac = (mid - s.prevX) / (x - s.prevX);
        s.crossingS = originS + (n - 1 + frac) * dtS;
      }
      if (x > s.lo + 0.6 * span) {
        if (s.state === 1 && n >= warmup && !Number.isNaN(s.crossingS)) {
          edges.push(s.crossingS);
          s.crossingS = Number.NaN;
        }
        s.state = 2;
      } else if (x < s.lo + 0.4 * span) {
        s.state = 1;
      }
    }
    s.prevX = x;
  }
}

/** Deterministic uniform numbers in [0, 1), so a failure can be replayed. */
function uniform(seed: number): () => number {
  const random = new SeededRandom(seed);
  return () => random.uniform();
}

/** A noisy pulse train with drifting period, level and gain, and some unusable samples. */
function tachSignal(n: number, seed: number, opts: { noise: number; bad: number; fsHz: number }): Float32Array {
  const rnd = uniform(seed);
  const x = new Float32Array(n);
  let phase = rnd();
  for (let i = 0; i < n; i++) {
    const rpm = 900 + 300 * Math.sin(i / (3 * opts.fsHz));
    phase += rpm / 60 / opts.fsHz;
    const f = phase - Math.floor(phase);
    const u = f < 0.02 ? f / 0.02 : f < 0.3 ? 1 : f < 0.32 ? 1 - (f - 0.3) / 0.02 : 0;
    const gain = 2 + Math.sin(i / (7 * opts.fsHz));
    x[i] = 0.3 + gain * u + opts.noise * (rnd() * 2 - 1);
    const r = rnd();
    if (r < opts.bad) x[i] = r < opts.bad / 3 ? Number.NaN : r < (2 * opts.bad) / 3 ? Number.POSITIVE_INFINITY : Number.NEGATIVE_INFINITY;
  }
  return x;
}

afterEach(() => {
  vi.restoreAllMocks();
});

/** Feeds `x` to a TachSpeed in blocks and to the reference, comparing edges and state after every block. */
function compare(x: Float32Array, fsHz: number, blocks: () => number, t0S = 3.25, gapAt = -1): number {
  const opts = { sampleRateHz: fsHz, pulsesPerRev: 1, rangeRpm: [600, 1500] as [number, number] };
  const tach = new TachSpeed(opts);
  const edgesOf: number[] = [];
  const onEdge = vi.spyOn(TachSpeed.prototype as unknown as { onEdge: (edgeS: number, out: unknown[]) => void }, 'onEdge');
  onEdge.mockImplementation(function (this: unknown, edgeS: number) {
    edgesOf.push(edgeS);
  });
  const inner = tach as unknown as RefState & { relaxPerSample: number; warmupSamples: number };
  const ref: RefState = { hi: 0, lo: 0, prevX: Number.NaN, state: 0, crossingS: Number.NaN };
  const refEdges: number[] = [];
  const dtS = 1 / fsHz;
  let originS = t0S;
  let gapped = false;
  for (let start = 0; start < x.length; ) {
    const n = Math.min(x.length - start, blocks());
    let blockT0S = t0S + start * dtS;
    if (gapAt >= 0 && start >= gapAt) {
      // A gap: the stream resumes a second later; both rebase and forget the pending crossing.
      blockT0S += 1;
      if (!gapped) {
        gapped = true;
        originS = blockT0S - start * dtS;
        ref.prevX = Number.NaN;
        ref.crossingS = Number.NaN;
      }
    }
    const block = x.subarray(start, start + n);
    tach.push(block, blockT0S);
    referenceBlock(ref, block, start, originS, dtS, inner.relaxPerSample, inner.warmupSamples, refEdges);
    expect(edgesOf).toEqual(refEdges);
    expect({ hi: inner.hi, lo: inner.lo, prevX: inner.prevX, state: inner.state, crossingS: inner.crossingS }).toEqual(ref);
    start += n;
  }
  return refEdges.length;
}

/** The kernel driven directly, chunk by chunk and edge by edge as TachSpeed.push drives it. */
function kernelBlock(s: RefState, samples: Float32Array, first: number, originS: number, dtS: number, relax: number, warmup: number, edges: number[]): void {
  const k = tachKernel();
  k.state.set([s.hi, s.lo, s.prevX, s.crossingS]);
  k.hysteresis[0] = s.state;
  for (let start = 0; start < samples.length; start += TACH_KERNEL_CHUNK) {
    const n = Math.min(TACH_KERNEL_CHUNK, samples.length - start);
    k.samples.set(samples.subarray(start, start + n));
    for (let from = 0; ; ) {
      const at = k.edges(from, n, first + start, relax, warmup, originS, dtS);
      if (at >= n) break;
      edges.push(k.state[3]);
      k.state[3] = Number.NaN;
      from = at + 1;
    }
  }
  [s.hi, s.lo, s.prevX, s.crossingS] = k.state;
  s.state = k.hysteresis[0];
}

describe('tach kernel (WebAssembly)', () => {
  it('meets the thresholds exactly as the JavaScript loop does (samples equal to a threshold)', () => {
    // With the envelope held (relax 0) between 0 and 5, the thresholds are exactly 2 (low),
    // 2.5 (mid) and 3 (high), and samples on a 0.5 grid land on each of them.
    const rnd = uniform(3);
    const x = new Float32Array(20_000);
    for (let i = 0; i < x.length; i++) x[i] = i < 2 ? 5 * i : 0.5 * Math.floor(rnd() * 11);
    for (const relax of [0, 2 ** -12]) {
      const ref: RefState = { hi: 0, lo: 0, prevX: Number.NaN, state: 0, crossingS: Number.NaN };
      const got: RefState = { ...ref };
      const refEdges: number[] = [];
      const edges: number[] = [];
      for (let start = 0; start < x.length; start += 1000) {
        const block = x.subarray(start, start + 1000);
        referenceBlock(ref, block, start, 0.25, 1e-4, relax, 100, refEdges);
        kernelBlock(got, block, start, 0.25, 1e-4, relax, 100, edges);
        expect(got).toEqual(ref);
      }
      expect(edges).toEqual(refEdges);
      expect(edges.length).toBeGreaterThan(1000);
    }
  });

  it('is the committed compilation of tachKernel.wat', async () => {
    const wat = readFileSync(new URL('../src/manipulation/tachKernel.wat', import.meta.url), 'utf8');
    const bytes = await compileKernel(wat);
    expect(Buffer.from(bytes).toString('base64')).toBe(TACH_KERNEL_WASM_BASE64);
  });

  it('gives the edges and state of the JavaScript loop bit for bit, over any block split', () => {
    const fsHz = 10_000;
    const x = tachSignal(120_000, 11, { noise: 0.25, bad: 0.002, fsHz });
    const rnd = uniform(5);
    // Blocks of 1 to 40,000 samples: within and across the kernel's chunk of 16,384.
    const edges = compare(x, fsHz, () => 1 + Math.floor(rnd() ** 3 * 40_000));
    expect(edges).toBeGreaterThan(100);
  });

  it('the same with heavy noise (crossings that do not become edges), a gap and a bad first sample', () => {
    const fsHz = 8_000;
    const x = tachSignal(60_000, 23, { noise: 0.9, bad: 0.01, fsHz });
    x[0] = Number.NaN;
    const rnd = uniform(9);
    const edges = compare(x, fsHz, () => 1 + Math.floor(rnd() * 3000), 0.5, 30_000);
    expect(edges).toBeGreaterThan(50);
  });

  it('the same on a flat start, tiny spans and a signal of one level', () => {
    const fsHz = 10_000;
    const x = new Float32Array(50_000);
    x.fill(1.5, 0, 20_000);
    for (let i = 20_000; i < 50_000; i++) x[i] = 1.5 + (i % 97 < 10 ? 1e-6 : 0);
    expect(compare(x, fsHz, () => 4096)).toBeGreaterThan(10);
    expect(compare(new Float32Array(30_000).fill(-2), fsHz, () => 7000)).toBe(0);
  });
});
