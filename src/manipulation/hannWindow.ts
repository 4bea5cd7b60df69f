/**
 * Periodic Hann window of N points: w_n = 0.5 - 0.5 cos(2 pi n / N), n = 0..N-1.
 *
 * Periodic (divide by N, not N-1) so that the window's DFT is non-zero only at bins 0 and +-1,
 * which is what FFT analysis of a stationary signal wants. Its figures of merit are computed from
 * the samples actually produced, not copied from a table:
 * - coherentGain = sum(w) / N; a sine's DFT peak is scaled by it (0.5 for Hann).
 * - enbwBins = N sum(w^2) / sum(w)^2, the equivalent noise bandwidth in bins (1.5 for Hann):
 *   the factor by which a windowed spectrum over-counts broadband power summed over bins.
 */
import { QbandError } from '../errors.ts';

export interface HannWindow {
  readonly size: number;
  /** The N window samples, as float32 to multiply float32 frames without conversion. */
  readonly w: Float32Array;
  readonly sum: number;
  readonly sumOfSquares: number;
  readonly coherentGain: number;
  readonly enbwBins: number;
}

const cache = new Map<number, HannWindow>();

/**
 * The window of `size` points; one shared instance per size (many channels, one cache-warm copy).
 * Treat `w` as read-only.
 */
export function hannWindow(size: number): HannWindow {
  const cached = cache.get(size);
  if (cached !== undefined) return cached;
  if (!Number.isInteger(size) || size < 2) {
    throw new QbandError('QB_E_DSP_ARGUMENT', `Hann window length must be an integer >= 2, got ${size}`);
  }
  const w = new Float32Array(size);
  let sum = 0;
  let sumOfSquares = 0;
  for (let n = 0; n < size; n++) {
    w[n] = 0.5 - 0.5 * Math.cos((2 * Math.PI * n) / size);
    // Sums of the float32 values actually used, so that scale factors match the arithmetic.
    sum += w[n];
    sumOfSquares += w[n] * w[n];
  }
  const win: HannWindow = {
    size,
    w,
    sum,
    sumOfSquares,
    coherentGain: sum / size,
    enbwBins: (size * sumOfSquares) / (sum * sum),
  };
  cache.set(size, win);
  return win;
}
