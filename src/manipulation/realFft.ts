/**
 * Power spectrum of one real frame: P_k = |X_k|^2 for k = 0..N/2, where
 * X_k = sum_{n=0}^{N-1} x_n e^{-2 pi i k n / N} is the raw, un-normalised DFT.
 *
 * Two interchangeable backends:
 * - 'pffft': PFFFT compiled to WebAssembly, SIMD build first, plain build if SIMD will not load.
 *   The module is loaded once per process and shared. The twiddle setup and the three aligned
 *   WASM buffers (input, output, work) are allocated once per size and shared by all instances
 *   of that size (see pffftPlan).
 * - 'fftjs': fft.js's radix-4 real transform in plain JavaScript, the general-purpose reference.
 *
 * Neither backend allocates per call.
 */
import FFT from 'fft.js';
import type { PffftModule } from '@echogarden/pffft-wasm';
import { QbandError } from '../errors.ts';

export interface RealFft {
  readonly size: number;
  /**
   * Writes |X_k|^2, k = 0..size/2, of `input` (length `size`) into `out` (length size/2 + 1);
   * `lines`: only k < lines (a caller that reads the bottom of the spectrum alone), the rest of
   * `out` left as it was.
   */
  powerSpectrum(input: Float32Array, out: Float64Array, lines?: number): void;
  /**
   * Where the backend has it (pffft): writes the transform of `input` into `out` (both length
   * `size`) in the ordered real layout [X_0, X_{N/2}, Re X_1, Im X_1, ..., Re X_{N/2-1}, Im X_{N/2-1}],
   * for the rolling spectrum's kernel to take the powers from.
   */
  orderedTransform?(input: Float32Array, out: Float32Array): void;
  /**
   * A transform of another size on the same backend, made at once (the backend's module is
   * loaded already): for transforms built inside the core, such as the tachless speed
   * tracker's frames, which then take the engine's backend.
   */
  withSize(size: number): RealFft;
}

export type RealFftBackend = 'pffft' | 'fftjs';

/** Smallest size PFFFT's real transform takes for powers of two; largest we accept (16 MiB of float32). */
export const MIN_FFT_SIZE = 32;
export const MAX_FFT_SIZE = 1 << 22;

export function isValidFftSize(size: number): boolean {
  return Number.isInteger(size) && size >= MIN_FFT_SIZE && size <= MAX_FFT_SIZE && (size & (size - 1)) === 0;
}

/** Throws QB_E_FFT_SIZE unless `size` is a power of two in [MIN_FFT_SIZE, MAX_FFT_SIZE]. */
export function assertFftSize(size: number, what = 'FFT frame size'): void {
  if (!isValidFftSize(size)) {
    throw new QbandError(
      'QB_E_FFT_SIZE',
      `${what} must be a power of two between ${MIN_FFT_SIZE} and ${MAX_FFT_SIZE}, got ${size}`,
    );
  }
}

export async function createRealFft(size: number, backend: RealFftBackend = 'pffft'): Promise<RealFft> {
  assertFftSize(size);
  if (backend === 'fftjs') return new FftJsRealFft(size);
  if (backend === 'pffft') return new PffftRealFft(await loadPffft(), size);
  throw new QbandError('QB_E_DSP_ARGUMENT', `FFT backend must be 'pffft' or 'fftjs', got '${String(backend)}'`);
}

/**
 * fft.js's transform, made at once (no module to load): for transforms built inside the core
 * when no backend is passed in.
 */
export function createFftJsRealFft(size: number): RealFft {
  assertFftSize(size);
  return new FftJsRealFft(size);
}

function checkLengths(size: number, input: Float32Array, out: Float64Array): void {
  if (input.length !== size || out.length !== size / 2 + 1) {
    throw new QbandError(
      'QB_E_DSP_ARGUMENT',
      `powerSpectrum of size ${size} needs input length ${size} and output length ${size / 2 + 1}, ` +
        `got ${input.length} and ${out.length}`,
    );
  }
}

class FftJsRealFft implements RealFft {
  readonly size: number;
  private readonly fft: FFT;
  /** Interleaved complex output; realTransform fills bins 0..N/2, which is all we read. */
  private readonly complex: Float64Array;

  constructor(size: number) {
    this.size = size;
    this.fft = new FFT(size);
    this.complex = new Float64Array(2 * size);
  }

  withSize(size: number): RealFft {
    return createFftJsRealFft(size);
  }

  powerSpectrum(input: Float32Array, out: Float64Array, lines = this.size / 2 + 1): void {
    checkLengths(this.size, input, out);
    const c = this.complex;
    this.fft.realTransform(c, input);
    const end = Math.min(this.size / 2, lines - 1);
    for (let k = 0; k <= end; k++) {
      const re = c[2 * k];
      const im = c[2 * k + 1];
      out[k] = re * re + im * im;
    }
  }
}

let pffftModule: Promise<PffftModule> | undefined;

/** Loads the WASM module once per process; every later call shares the same promise. */
function loadPffft(): Promise<PffftModule> {
  pffftModule ??= (async () => {
    try {
      return await (await import('@echogarden/pffft-wasm/simd')).default();
    } catch (simdError) {
      try {
        return await (await import('@echogarden/pffft-wasm')).default();
      } catch (plainError) {
        pffftModule = undefined; // let a later call try again
        throw new QbandError(
          'QB_E_FFT_LOAD',
          `could not load the WebAssembly FFT: SIMD build: ${String(simdError)}; plain build: ${String(plainError)}`,
          { cause: plainError },
        );
      }
    }
  })();
  return pffftModule;
}

/**
 * Per size: PFFFT's read-only twiddle setup and one set of aligned buffers (input, output, work),
 * shared by every instance of that size. Sharing is safe because a transform runs synchronously
 * from copy-in to power-out and JavaScript runs one call at a time; it keeps the WASM side of
 * many channels at one cache-warm 3 N floats instead of 3 N per channel. Allocated on the first
 * instance of a size and kept for the life of the process (a handful of sizes at most).
 */
interface PffftPlan {
  setup: number;
  inputPtr: number;
  outputPtr: number;
  workPtr: number;
}

const pffftPlans = new Map<number, PffftPlan>();

function pffftPlan(module: PffftModule, size: number): PffftPlan {
  let plan = pffftPlans.get(size);
  if (plan === undefined) {
    const setup = module._pffft_new_setup(size, 0 /* PFFFT_REAL */);
    if (setup === 0) throw new QbandError('QB_E_FFT_SIZE', `the WebAssembly FFT does not support size ${size}`);
    // An explicit work area: PFFFT would otherwise use the stack, which is too small for large N.
    const bytes = 4 * size;
    plan = {
      setup,
      inputPtr: module._pffft_aligned_malloc(bytes),
      outputPtr: module._pffft_aligned_malloc(bytes),
      workPtr: module._pffft_aligned_malloc(bytes),
    };
    pffftPlans.set(size, plan);
  }
  return plan;
}

class PffftRealFft implements RealFft {
  readonly size: number;
  private readonly module: PffftModule;
  private readonly plan: PffftPlan;

  constructor(module: PffftModule, size: number) {
    this.size = size;
    this.module = module;
    this.plan = pffftPlan(module, size);
  }

  withSize(size: number): RealFft {
    assertFftSize(size);
    return new PffftRealFft(this.module, size);
  }

  orderedTransform(input: Float32Array, out: Float32Array): void {
    if (input.length !== this.size || out.length !== this.size) {
      throw new QbandError('QB_E_DSP_ARGUMENT', `orderedTransform of size ${this.size} needs input and output of length ${this.size}`);
    }
    const m = this.module;
    const { setup, inputPtr, outputPtr, workPtr } = this.plan;
    m.HEAPF32.set(input, inputPtr >>> 2);
    m._pffft_transform_ordered(setup, inputPtr, outputPtr, workPtr, 0 /* forward */);
    const o = outputPtr >>> 2;
    out.set(m.HEAPF32.subarray(o, o + this.size));
  }

  powerSpectrum(input: Float32Array, out: Float64Array, lines = this.size / 2 + 1): void {
    checkLengths(this.size, input, out);
    const m = this.module;
    const { setup, inputPtr, outputPtr, workPtr } = this.plan;
    // Read HEAPF32 after every call into WASM: a memory growth elsewhere replaces the view.
    m.HEAPF32.set(input, inputPtr >>> 2);
    m._pffft_transform_ordered(setup, inputPtr, outputPtr, workPtr, 0 /* forward */);
    const heap = m.HEAPF32;
    const o = outputPtr >>> 2;
    const half = this.size / 2;
    // Ordered real layout: [X_0, X_{N/2}, Re X_1, Im X_1, ..., Re X_{N/2-1}, Im X_{N/2-1}],
    // with X_0 and X_{N/2} purely real.
    const dc = heap[o];
    const nyquist = heap[o + 1];
    out[0] = dc * dc;
    if (lines > half) out[half] = nyquist * nyquist;
    const end = Math.min(half, lines);
    for (let k = 1; k < end; k++) {
      const re = heap[o + 2 * k];
      const im = heap[o + 2 * k + 1];
      out[k] = re * re + im * im;
    }
  }
}
