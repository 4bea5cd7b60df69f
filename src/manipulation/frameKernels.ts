/**
 * The rolling spectrum's per-frame kernels in plain JavaScript: what spectrumKernel.wat computes
 * in WebAssembly SIMD, number for number. They run where the WebAssembly kernel cannot load, with
 * the fft.js backend (whose output is powers, not the ordered layout), on the spectrum's rare
 * rebuild path, and in the benchmark's stage profile.
 */
// Hot-path kernels, exported for the benchmark. Loops are unrolled by four with independent
// accumulators: once V8's ArrayBuffer-detaching protector is invalidated (which loading any
// CommonJS package through tsx does, so in the running agent) every typed-array access carries a
// check, and plain loops run about twice as slow; unrolled ones lose much less
// (bench/spectrumBench.ts).

/** Mean of frame (four partial sums). */
export function frameMean(frame: Float32Array): number {
  const n = frame.length;
  let s0 = 0;
  let s1 = 0;
  let s2 = 0;
  let s3 = 0;
  let i = 0;
  for (; i + 3 < n; i += 4) {
    s0 += frame[i];
    s1 += frame[i + 1];
    s2 += frame[i + 2];
    s3 += frame[i + 3];
  }
  for (; i < n; i++) s0 += frame[i];
  return (s0 + s1 + s2 + s3) / n;
}

/** out[i] = (frame[i] - mean) * w[i]. */
export function removeMeanAndWindow(frame: Float32Array, mean: number, w: Float32Array, out: Float32Array): void {
  const n = frame.length;
  let i = 0;
  for (; i + 3 < n; i += 4) {
    out[i] = (frame[i] - mean) * w[i];
    out[i + 1] = (frame[i + 1] - mean) * w[i + 1];
    out[i + 2] = (frame[i + 2] - mean) * w[i + 2];
    out[i + 3] = (frame[i + 3] - mean) * w[i + 3];
  }
  for (; i < n; i++) out[i] = (frame[i] - mean) * w[i];
}

/**
 * Running power average to RMS amplitude, one pass per line:
 *   sum_k += power_k - leaving_k;  leaving_k = power_k;  out_k = sqrt(sum_k * scale * inv)
 * where `leaving` is the ring slot the new frame replaces (zeros while the ring fills), `scale` is
 * 2 / sum(w)^2 and inv = 1 / frames in the average. The single-sided factor 2 does not apply to
 * the DC and Nyquist lines, which are fixed after the loop. Pass power = null to only convert sum.
 */
export function updateAverage(
  sum: Float64Array,
  leaving: Float64Array | null,
  power: Float64Array | null,
  scale: number,
  inv: number,
  out: Float64Array,
): void {
  const n = sum.length;
  const c = scale * inv;
  if (power !== null && leaving !== null) {
    for (let k = 0; k < n; k++) {
      const p = power[k];
      const q = sum[k] - leaving[k] + p;
      leaving[k] = p;
      sum[k] = q;
      // Clamp rounding below zero; NaN passes through (NaN < 0 is false).
      out[k] = Math.sqrt((q < 0 ? 0 : q) * c);
    }
  } else {
    for (let k = 0; k < n; k++) {
      const q = sum[k];
      out[k] = Math.sqrt((q < 0 ? 0 : q) * c);
    }
  }
  out[0] *= Math.SQRT1_2;
  out[n - 1] *= Math.SQRT1_2;
}
