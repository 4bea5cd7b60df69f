/**
 * Streaming, anti-aliased decimation by a power of two: a cascade of identical half-band FIR
 * stages, each low-pass filtering and keeping every second sample.
 *
 * Each stage is a 59-tap half-band filter (windowed sinc, cut-off at a quarter of the stage's input
 * rate, Kaiser window beta = 9). Half-band: every even-offset tap except the centre is zero and the
 * centre tap is 1/2, so a stage costs 15 multiplies per output sample (symmetric pairs), about 8
 * per input sample; the whole cascade costs less than twice the first stage.
 *
 * Response of one stage (fs = its input rate), and so of the cascade at its output rate fo:
 * - passband edge 0.2 fs = 0.4 fo: content below 0.4 fo is kept and protected from aliases;
 *   spectrum lines above 0.4 fo (0.8 of the output Nyquist) may hold attenuated or aliased content;
 * - stopband from 0.3 fs: whatever folds into the passband is attenuated by the stopband figure.
 * Measured with sines at factors 2 and 8 (test/decimator.test.ts checks it): passband flat within
 * 0.0006 dB up to 0.4 fo; input sines that would fold into 0..0.4 fo come out at least 91 dB down.
 *
 * Timing: each stage delays by (59 - 1) / 2 = 29 of its input samples, so the cascade delays by
 * 29 (factor - 1) input samples (`groupDelayInputSamples`). Output sample m is produced on input
 * sample m*factor + factor - 1 counted from the last reset; `phase` says where the next block starts.
 */
import { QbandError } from '../errors.ts';

const TAPS = 59;
const HALF = (TAPS - 1) / 2; // 29
const KAISER_BETA = 9;

/** Modified Bessel function of the first kind, order 0, by its power series (converges fast for x < 30). */
function besselI0(x: number): number {
  let term = 1;
  let sum = 1;
  const q = (x * x) / 4;
  for (let k = 1; k < 60; k++) {
    term *= q / (k * k);
    sum += term;
    if (term < sum * 1e-17) break;
  }
  return sum;
}

/**
 * Non-zero side taps h[d] for odd offsets d = 1, 3, ..., 29 from the centre:
 * h[d] = 0.5 sinc(d / 2) kaiser(d), then scaled so that 0.5 + 2 sum(h) = 1 (unit gain at DC),
 * which keeps the half-band identity H(f) + H(fs/2 - f) = 1.
 */
function halfBandSideTaps(): Float64Array {
  const side = new Float64Array((HALF + 1) / 2);
  let sum = 0;
  for (let j = 0; j < side.length; j++) {
    const d = 2 * j + 1;
    const sinc = Math.sin((Math.PI * d) / 2) / ((Math.PI * d) / 2);
    const kaiser = besselI0(KAISER_BETA * Math.sqrt(1 - (d / HALF) ** 2)) / besselI0(KAISER_BETA);
    side[j] = 0.5 * sinc * kaiser;
    sum += side[j];
  }
  for (let j = 0; j < side.length; j++) side[j] *= 0.25 / sum;
  return side;
}

const SIDE_TAPS = halfBandSideTaps();

export function isValidDecimation(factor: number): boolean {
  return Number.isInteger(factor) && factor >= 1 && factor <= 1 << 16 && (factor & (factor - 1)) === 0;
}

export class Decimator {
  readonly factor: number;
  /** Delay of the cascade's linear-phase filters, in input samples. */
  readonly groupDelayInputSamples: number;
  private readonly stages: number;
  /** Per stage a delay line written twice (at p and p + TAPS) so the last TAPS samples are contiguous. */
  private readonly lines: Float64Array[];
  private readonly pos: Int32Array;
  /** Per stage: 1 when the next input completes a pair and so yields an output. */
  private readonly odd: Uint8Array;
  private inputsSinceOutput = 0;

  constructor(factor: number) {
    if (!isValidDecimation(factor)) {
      throw new QbandError('QB_E_DSP_ARGUMENT', `decimation factor must be a power of two from 1 to 65536, got ${factor}`);
    }
    this.factor = factor;
    this.stages = Math.round(Math.log2(factor));
    this.groupDelayInputSamples = HALF * (factor - 1);
    this.lines = Array.from({ length: this.stages }, () => new Float64Array(2 * TAPS));
    this.pos = new Int32Array(this.stages);
    this.odd = new Uint8Array(this.stages);
  }

  /** Inputs consumed since the last output (0..factor-1): the next output comes after factor - phase more. */
  get phase(): number {
    return this.inputsSinceOutput;
  }

  /** Clears the filter history, as if no sample had been seen. */
  reset(): void {
    for (const line of this.lines) line.fill(0);
    this.pos.fill(0);
    this.odd.fill(0);
    this.inputsSinceOutput = 0;
  }

  /**
   * Filters and decimates `input`, continuing from the previous block. `out` must hold at least
   * ceil(input.length / factor) samples. Returns the number of samples written to `out`.
   */
  process(input: Float32Array, out: Float32Array): number {
    const n = input.length;
    const need = Math.ceil(n / this.factor);
    if (out.length < need) {
      throw new QbandError(
        'QB_E_DSP_ARGUMENT',
        `decimator output buffer holds ${out.length} samples, needs at least ${need} for ${n} inputs at factor ${this.factor}`,
      );
    }
    if (this.stages === 0) {
      out.set(input);
      return n;
    }
    const { lines, pos, odd, stages } = this;
    const h = SIDE_TAPS;
    const nh = h.length;
    let written = 0;
    for (let i = 0; i < n; i++) {
      let x: number = input[i];
      for (let s = 0; s < stages; s++) {
        const line = lines[s];
        const p = pos[s];
        line[p] = x;
        line[p + TAPS] = x;
        pos[s] = p + 1 === TAPS ? 0 : p + 1;
        if (odd[s] === 0) {
          odd[s] = 1; // first of a pair: no output from this stage, nor from those after it
          break;
        }
        odd[s] = 0;
        // The last TAPS inputs, oldest first, are line[p + 1 .. p + TAPS]; the centre is p + 1 + HALF.
        const c = p + 1 + HALF;
        let acc = 0.5 * line[c];
        for (let j = 0; j < nh; j++) {
          const d = 2 * j + 1;
          acc += h[j] * (line[c - d] + line[c + d]);
        }
        x = acc;
        if (s === stages - 1) out[written++] = acc;
      }
    }
    this.inputsSinceOutput = (this.inputsSinceOutput + n) % this.factor;
    return written;
  }
}
