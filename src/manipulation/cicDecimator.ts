/**
 * A cheap first zoom for paths that only need the bottom of the spectrum: decimation by R with a
 * second-order cascaded integrator-comb response, written as its FIR (a triangle of 2R - 1
 * taps, sum R^2, normalised to unit gain at DC).
 *
 * Response: |H(f)| = |sin(pi f R / fs) / (R sin(pi f / fs))|^2. Its nulls sit on the multiples
 * of the output rate fo = fs / R, where the components that would alias onto low frequencies
 * come from: content at k fo +- b is attenuated by about (pi b / fo)^2, 48 dB for b = fo / 16.
 * Droop at b: the same formula near DC, under 0.1 dB for b <= fo / 16. So keep what is needed
 * below fo / 16 and decimate further with the half-band cascade (decimator.ts).
 *
 * Timing, as decimator.ts: output m is produced on input m R + R - 1 (counted from the last
 * reset) and its content is delayed by R - 1 input samples (the triangle's centre).
 * Cost: about 2 multiply-adds per input sample.
 */
export class CicDecimator {
  readonly factor: number;
  readonly delayInputSamples: number;
  private readonly taps: Float64Array;
  /** The last 2R - 1 inputs, written twice (at p and p + L) so they are contiguous. */
  private readonly line: Float64Array;
  private pos = 0;
  private count = 0;

  constructor(factor: number) {
    this.factor = factor;
    this.delayInputSamples = factor - 1;
    const n = 2 * factor - 1;
    this.taps = new Float64Array(n);
    for (let j = 0; j < n; j++) this.taps[j] = (factor - Math.abs(j - (factor - 1))) / (factor * factor);
    this.line = new Float64Array(2 * n);
  }

  /** Inputs consumed since the last output (0..factor-1). */
  get phase(): number {
    return this.count;
  }

  reset(): void {
    this.line.fill(0);
    this.pos = 0;
    this.count = 0;
  }

  /** Filters and decimates `input`; `out` must hold ceil(input.length / factor). Returns outputs written. */
  process(input: Float32Array, out: Float32Array): number {
    const r = this.factor;
    if (r === 1) {
      out.set(input);
      return input.length;
    }
    const taps = this.taps;
    const line = this.line;
    const n = taps.length;
    // The position and count in locals for the loop (every input sample), stored back after.
    let pos = this.pos;
    let count = this.count;
    let written = 0;
    for (let i = 0; i < input.length; i++) {
      const x = input[i];
      line[pos] = x;
      line[pos + n] = x;
      pos = pos + 1 === n ? 0 : pos + 1;
      if (++count < r) continue;
      count = 0;
      // Oldest first: line[pos .. pos + n - 1]; the triangle is symmetric.
      let acc = 0;
      for (let j = 0; j < n; j++) acc += taps[j] * line[pos + j];
      out[written++] = acc;
    }
    this.pos = pos;
    this.count = count;
    return written;
  }
}
