import { describe, expect, it } from 'vitest';
import { QbandError } from '../src/errors.ts';
import { hannWindow } from '../src/manipulation/hannWindow.ts';
import { createRealFft, type RealFftBackend } from '../src/manipulation/realFft.ts';
import { RollingSpectrum, type SpectrumFrame } from '../src/manipulation/rollingSpectrum.ts';
import {
  accelerationToVelocityMmS,
  bandRms,
  interpolatePeak,
  STANDARD_GRAVITY_M_S2,
} from '../src/manipulation/spectrumMath.ts';
import { expectClose, expectRelClose, gaussianNoise, sine } from './support/signals.ts';

const BACKENDS: RealFftBackend[] = ['pffft', 'fftjs'];

async function spectrumOf(
  x: Float32Array,
  opts: { rateHz: number; frameSize: number; overlap?: number; averages?: number; decimation?: number; backend?: RealFftBackend },
): Promise<SpectrumFrame[]> {
  const rs = new RollingSpectrum({
    inputRateHz: opts.rateHz,
    frameSize: opts.frameSize,
    overlap: opts.overlap ?? 0,
    averages: opts.averages ?? 1,
    decimation: opts.decimation ?? 1,
    fft: await createRealFft(opts.frameSize, opts.backend ?? 'pffft'),
  });
  // Copy: the frames' arrays belong to the RollingSpectrum until its next push.
  return rs.push(x, 0).map((f) => ({ ...f, amplitude: f.amplitude.slice() }));
}

describe('Hann window', () => {
  // Harris, "On the use of windows for harmonic analysis with the DFT", Proc. IEEE 1978, table 1:
  // Hann coherent gain 0.50, ENBW 1.50 bins, scalloping loss 1.42 dB.
  // Tolerance 1e-6: the window is stored as float32 (relative rounding ~6e-8 per sample).
  for (const n of [32, 1024, 8192]) {
    it(`of ${n} points has coherent gain 0.5 and ENBW 1.5 bins`, () => {
      const w = hannWindow(n);
      expectClose(`coherent gain, N=${n}`, w.coherentGain, 0.5, 1e-6);
      expectClose(`ENBW in bins, N=${n}`, w.enbwBins, 1.5, 1e-6);
    });
  }

  it('is periodic: w[0] = 0 and w[N/2] = 1 (definition 0.5 - 0.5 cos(2 pi n / N))', () => {
    const w = hannWindow(64).w;
    expectClose('w[0]', w[0], 0, 0);
    expectClose('w[32]', w[32], 1, 0);
    expectClose('w[16] = 0.5 - 0.5 cos(pi/2)', w[16], 0.5, 1e-7);
  });

  it('rejects a length below 2 with QB_E_DSP_ARGUMENT', () => {
    expect(() => hannWindow(1)).toThrow(/Hann window length must be an integer >= 2, got 1/);
  });
});

describe('real FFT power spectrum', () => {
  const n = 2048;
  const x = gaussianNoise(n, 1, 11);
  for (let i = 0; i < n; i++) x[i] += 0.3; // a DC component, so line 0 is exercised

  for (const backend of BACKENDS) {
    it(`${backend}: Parseval, sum x^2 = (1/N) sum over the two-sided spectrum of |X_k|^2`, async () => {
      // Parseval's theorem for the DFT (any DSP text). Two-sided sum from one side:
      // P_0 + P_{N/2} + 2 sum_{k=1}^{N/2-1} P_k. Tolerance 1e-5 relative: float32 FFT.
      const fft = await createRealFft(n, backend);
      const p = new Float64Array(n / 2 + 1);
      fft.powerSpectrum(x, p);
      let time = 0;
      for (const v of x) time += v * v;
      let freq = p[0] + p[n / 2];
      for (let k = 1; k < n / 2; k++) freq += 2 * p[k];
      expectRelClose(`${backend} Parseval, N=${n}`, freq / n, time, 1e-5);
    });
  }

  it('pffft gives the same power spectrum as fft.js (general-purpose reference)', async () => {
    // Reference: fft.js realTransform. Tolerance: 1e-6 of the largest line, float32 rounding in pffft.
    const a = new Float64Array(n / 2 + 1);
    const b = new Float64Array(n / 2 + 1);
    (await createRealFft(n, 'pffft')).powerSpectrum(x, a);
    (await createRealFft(n, 'fftjs')).powerSpectrum(x, b);
    const scale = Math.max(...b);
    for (let k = 0; k <= n / 2; k++) expectClose(`line ${k}`, a[k] / scale, b[k] / scale, 1e-6);
  });

  for (const backend of BACKENDS) {
    it(`${backend}: asked for the bottom lines only, gives those bit for bit and leaves the others as they were`, async () => {
      const fft = await createRealFft(n, backend);
      const all = new Float64Array(n / 2 + 1);
      fft.powerSpectrum(x, all);
      // The edges, and 157: the lines the tachless tracker reads of its 2048-point frames on the demo map.
      for (const lines of [1, 2, 157, n / 2, n / 2 + 1]) {
        const some = new Float64Array(n / 2 + 1).fill(-1);
        fft.powerSpectrum(x, some, lines);
        for (let k = 0; k <= n / 2; k++) {
          const want = k < lines ? all[k] : -1;
          if (!Object.is(some[k], want)) expect.fail(`${lines} lines asked, line ${k}: ${some[k]}, expected ${want}`);
        }
      }
    });
  }

  it('puts a cosine of amplitude A on line k at |X_k|^2 = (A N / 2)^2 (hand calculation)', async () => {
    const fft = await createRealFft(256);
    const c = new Float32Array(256);
    for (let i = 0; i < 256; i++) c[i] = 2 * Math.cos((2 * Math.PI * 5 * i) / 256);
    const p = new Float64Array(129);
    fft.powerSpectrum(c, p);
    expectRelClose('|X_5|^2', p[5], (2 * 256 / 2) ** 2, 1e-6);
  });

  it('rejects a non-power-of-two frame size with QB_E_FFT_SIZE quoting the value', async () => {
    for (const bad of [1000, 48, 16, 0, 4096.5]) {
      await expect(createRealFft(bad)).rejects.toThrow(`must be a power of two between 32 and 4194304, got ${bad}`);
    }
    const err = await createRealFft(1000).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(QbandError);
    expect((err as QbandError).code).toBe('QB_E_FFT_SIZE');
  });

  it('rejects buffers of the wrong length', async () => {
    const fft = await createRealFft(64);
    expect(() => fft.powerSpectrum(new Float32Array(63), new Float64Array(33))).toThrow(/needs input length 64/);
  });
});

describe('rolling spectrum amplitude', () => {
  const rateHz = 4096;
  const frameSize = 4096; // 1 Hz lines

  for (const backend of BACKENDS) {
    it(`${backend}: a sine of peak A on a line reads A / sqrt(2) there, A / (2 sqrt(2)) on each neighbour`, async () => {
      // Hand calculation: |X_k| = A sum(w) / 2, scaled by sqrt(2) / sum(w) -> A / sqrt(2).
      // The neighbours follow from the periodic Hann's DFT: -1/4, 1/2, -1/4 of N (half the centre).
      // Tolerance 1e-6 relative: float32 samples and FFT.
      const A = 3;
      const [f] = await spectrumOf(sine(frameSize, 100, rateHz, A, 0.7), { rateHz, frameSize, backend });
      expectRelClose('line 100', f.amplitude[100], A / Math.SQRT2, 1e-6);
      expectRelClose('line 99', f.amplitude[99], A / (2 * Math.SQRT2), 1e-5);
      expectRelClose('line 101', f.amplitude[101], A / (2 * Math.SQRT2), 1e-5);
      expect(f.amplitude[110], 'line 110, far from the tone').toBeLessThan(1e-5 * A);
    });
  }

  it('at half a line off, the raw peak is low by the Hann scalloping loss of 1.42 dB', async () => {
    // Harris 1978, table 1: Hann scalloping loss 1.42 dB. Exact value for large N:
    // |W(0.5)| = sinc(0.5) / (1 - 0.25) = (2/pi) / 0.75. Tolerance 1e-4 relative (finite N).
    const [f] = await spectrumOf(sine(frameSize, 200.5, rateHz, 1), { rateHz, frameSize });
    const expected = (1 / Math.SQRT2) * (2 / Math.PI / 0.75);
    expectRelClose('line 200 of a tone at 200.5 Hz', f.amplitude[200], expected, 1e-4);
    expectClose('loss in dB', -20 * Math.log10(f.amplitude[200] * Math.SQRT2), 1.42, 0.005);
  });

  it('recovers frequency and amplitude of a sine between lines with interpolatePeak', async () => {
    // Reference: the generated tone itself. Measured worst case over 10..2000 lines and
    // offsets -0.5..0.5 is about 7e-5 line and 1e-5 in amplitude; tolerances 5e-4 line and
    // 1e-4 relative leave room for float32 rounding.
    const A = 1.7;
    for (const line of [10, 37.25, 100.5, 411.9, 1500.37, 1999.1]) {
      const [f] = await spectrumOf(sine(frameSize, line, rateHz, A, 0.3), { rateHz, frameSize });
      const p = interpolatePeak(f.amplitude, f.binHz, line, 3);
      expect(p, `peak near ${line} Hz`).not.toBeNull();
      expectClose(`frequency of a tone at ${line} Hz`, (p as { freqHz: number }).freqHz, line, 5e-4 * f.binHz);
      expectRelClose(`amplitude of a tone at ${line} Hz`, (p as { amplitude: number }).amplitude, A / Math.SQRT2, 1e-4);
    }
  });

  it('interpolatePeak returns null for a search window outside the spectrum', () => {
    expect(interpolatePeak(new Float64Array(10), 1, 50, 2)).toBeNull();
  });

  it('interpolatePeak keeps the edge line when the window sits on the flank of a larger peak', () => {
    const a = new Float64Array(20);
    a[10] = 1;
    a[9] = 0.5;
    a[11] = 0.5;
    a[8] = 0.1;
    const p = interpolatePeak(a, 1, 8, 1); // lines 7..9; line 9 is largest but line 10 is larger
    expect(p).toEqual({ freqHz: 9, amplitude: 0.5, bin: 9 });
  });

  it('band RMS with the ENBW divided out equals the time-domain RMS of white noise', async () => {
    // Parseval again, through the whole pipeline. For Gaussian noise the windowed estimate of the
    // mean square has relative standard deviation sqrt(2 sum w^4) / sum w^2 per frame
    // (variance of a weighted sum of squared Gaussians), divided by sqrt(frames) for independent
    // frames (overlap 0). Tolerance: 5 such standard deviations.
    const frames = 16;
    const x = gaussianNoise(frameSize * frames, 0.8, 5);
    const f = (await spectrumOf(x, { rateHz, frameSize, averages: frames })).at(-1) as SpectrumFrame;
    expect(f.averagedFrames).toBe(frames);
    const w = hannWindow(frameSize);
    let ms = 0;
    for (const v of x) ms += v * v;
    ms /= x.length;
    const rms = bandRms(f.amplitude, f.binHz, 0, rateHz / 2, w.enbwBins);
    let sumW4 = 0;
    for (const v of w.w) sumW4 += v ** 4;
    const sigmaRel = Math.sqrt(2 * sumW4) / w.sumOfSquares / Math.sqrt(frames);
    expectRelClose('mean square from the spectrum', rms * rms, ms, 5 * sigmaRel);
  });

  it('band RMS of one sine over its few lines is its RMS, on a line or between lines', async () => {
    // Hand calculation: the RMS of A sin is A / sqrt(2). Sum over +-8 lines catches all but
    // ~1e-5 of a Hann tone's power (its sidelobes fall 18 dB per octave); tolerance 1e-4.
    const A = 2.5;
    for (const hz of [300, 300.5, 301.3]) {
      const [f] = await spectrumOf(sine(frameSize, hz, rateHz, A), { rateHz, frameSize });
      const rms = bandRms(f.amplitude, f.binHz, hz - 8, hz + 8, hannWindow(frameSize).enbwBins);
      expectRelClose(`band RMS of a sine at ${hz} Hz`, rms, A / Math.SQRT2, 1e-4);
    }
  });

  it('band RMS includes a line exactly on a band edge', () => {
    const a = new Float64Array(11);
    a[3] = 1;
    a[7] = 1;
    // Lines 3..7 at 0.5 Hz spacing: [1.5, 3.5] Hz includes both edge lines.
    expectClose('both edge lines', bandRms(a, 0.5, 1.5, 3.5, 1), Math.SQRT2, 1e-12);
    expectClose('just past the edges', bandRms(a, 0.5, 1.5000001, 3.4999999, 1), 0, 0);
  });
});

describe('acceleration to velocity', () => {
  it('1 g peak at 100 Hz gives 9.80665 / (2 pi 100) m/s peak (hand calculation)', async () => {
    // v = a / (2 pi f); 1 g = 9.80665 m/s^2 (standard gravity, CGPM 1901 / ISO 80000-3).
    // 12 800 Hz, 4096 points: 3.125 Hz lines, 100 Hz is line 32. Tolerance 1e-6: float32.
    const rateHz = 12_800;
    const [f] = await spectrumOf(sine(4096, 100, rateHz, 1), { rateHz, frameSize: 4096 });
    const v = new Float64Array(f.amplitude.length);
    accelerationToVelocityMmS(f.amplitude, f.binHz, 'g', v);
    const expectedPeakMmS = (STANDARD_GRAVITY_M_S2 / (2 * Math.PI * 100)) * 1000; // 15.6078 mm/s
    expectRelClose('velocity peak at 100 Hz, mm/s', v[32] * Math.SQRT2, expectedPeakMmS, 1e-6);
    expectClose('hand value 9.80665 / 628.3185 m/s = 15.6078 mm/s', expectedPeakMmS, 15.6078, 5e-5);
  });

  it('m/s^2 input skips the g conversion, and lines below minHz are zero', () => {
    const a = new Float64Array([5, 5, 5, 5, 5]);
    const v = new Float64Array(5);
    accelerationToVelocityMmS(a, 1, 'm/s^2', v, 2);
    expect(Array.from(v.subarray(0, 2))).toEqual([0, 0]);
    expectRelClose('line 2 (2 Hz, exactly minHz)', v[2], (5 / (2 * Math.PI * 2)) * 1000, 1e-12);
  });
});

describe('rolling spectrum streaming', () => {
  const rateHz = 1000;
  const frameSize = 256;
  const signal = (() => {
    const x = gaussianNoise(5000, 0.2, 9);
    const s = sine(5000, 123.4, rateHz, 1);
    for (let i = 0; i < x.length; i++) x[i] += s[i] + 0.05;
    return x;
  })();

  async function make(decimation = 1): Promise<RollingSpectrum> {
    return new RollingSpectrum({ inputRateHz: rateHz, frameSize, overlap: 0.5, averages: 4, decimation, fft: await createRealFft(frameSize) });
  }

  const copy = (frames: SpectrumFrame[]): SpectrumFrame[] => frames.map((f) => ({ ...f, amplitude: f.amplitude.slice() }));

  it('empty block returns no frames and changes nothing', async () => {
    const a = await make();
    const b = await make();
    expect(a.push(new Float32Array(0), 0)).toEqual([]);
    expect(copy(a.push(signal, 0))).toEqual(copy(b.push(signal, 0)));
  });

  for (const decimation of [1, 4]) {
    it(`one sample at a time gives the same frames as one big block (decimation ${decimation})`, async () => {
      const big = copy((await make(decimation)).push(signal, 2));
      const rs = await make(decimation);
      const single: SpectrumFrame[] = [];
      for (let i = 0; i < signal.length; i++) single.push(...copy(rs.push(signal.subarray(i, i + 1), 2 + i / rateHz)));
      expect(single.length).toBe(big.length);
      expect(big.length).toBeGreaterThan(4);
      for (let j = 0; j < big.length; j++) {
        // Stamps count inputs from the first block, so they do not depend on the cut, bit for bit.
        expect(single[j].tEndS, `frame ${j} tEndS`).toBe(big[j].tEndS);
        expect(single[j].averagedFrames).toBe(big[j].averagedFrames);
        for (let k = 0; k < big[j].amplitude.length; k++) expectClose(`frame ${j} line ${k}`, single[j].amplitude[k], big[j].amplitude[k], 1e-12);
      }
    });
  }

  it('times frames by the end of their last sample and counts the average up to `averages`', async () => {
    // Hop = 128 samples at 1000 Hz; the first frame ends after 256 samples.
    const frames = (await make()).push(signal, 10);
    expectClose('first tEndS', frames[0].tEndS, 10 + 256 / rateHz, 1e-12);
    expectClose('hop', frames[1].tEndS - frames[0].tEndS, 128 / rateHz, 1e-12);
    expect(frames.slice(0, 6).map((f) => f.averagedFrames)).toEqual([1, 2, 3, 4, 4, 4]);
    expect(frames[0].binHz).toBe(rateHz / frameSize);
  });

  it('corrects frame times of decimated frames for the filter delay (each stage\'s half length at its rate)', async () => {
    const frames = (await make(4)).push(signal, 0);
    // First frame: 256 outputs, the last produced on input 4 * 256 - 1 = 1023; its content is
    // 11 + 2 * 29 = 69 inputs older (a 23-tap stage, then the 59-tap one at half the rate); the
    // frame ends one output period (4 inputs) after it.
    expectClose('first tEndS', frames[0].tEndS, (1023 - 69 + 4) / rateHz, 1e-12);
    expect(frames[0].sampleRateHz).toBe(250);
  });

  it('keeps a sine on its line through decimation (alias-free band)', async () => {
    const frames = (await make(4)).push(sine(8000, 60, rateHz, 1), 0);
    const f = frames.at(-1) as SpectrumFrame;
    const p = interpolatePeak(f.amplitude, f.binHz, 60, 3);
    expectClose('frequency after decimation by 4', (p as { freqHz: number }).freqHz, 60, 1e-3);
    expectRelClose('amplitude after decimation by 4', (p as { amplitude: number }).amplitude, 1 / Math.SQRT2, 1e-3);
  });

  it('NaN in a block: frames holding it read NaN; once it has left the average, output is clean again', async () => {
    const dirty = signal.slice();
    dirty[1000] = Number.NaN;
    const a = copy((await make()).push(dirty, 0));
    const b = copy((await make()).push(signal, 0));
    const touched = a.filter((f) => Number.isNaN(f.amplitude[10])).length;
    // Sample 1000 is in 2 frames (50 % overlap); each stays in 4 averages: 5 frames show NaN.
    expect(touched).toBe(5);
    const last = a.length - 1;
    for (let k = 0; k < a[last].amplitude.length; k++) expectClose(`last frame line ${k}`, a[last].amplitude[k], b[last].amplitude[k], 1e-9);
  });

  it('reset() forgets history: the same data then gives the same frames', async () => {
    const rs = await make();
    const first = copy(rs.push(signal, 0));
    rs.reset();
    expect(copy(rs.push(signal, 0))).toEqual(first);
  });

  it('rejects bad options with QB_E_DSP_ARGUMENT listing every problem', async () => {
    const fft = await createRealFft(256);
    const make = () => new RollingSpectrum({ inputRateHz: 0, frameSize: 256, overlap: 1, averages: 0, decimation: 3, fft });
    expect(make).toThrow(QbandError);
    expect(make).toThrow(/inputRateHz must be finite and > 0, got 0; overlap must be in \[0, 1\), got 1; averages must be an integer from 1 to 100000, got 0; decimation must be a power of two from 1 to 65536, got 3/);
  });

  it('rejects a non-power-of-two frame size with QB_E_FFT_SIZE', async () => {
    const fft = await createRealFft(256);
    expect(() => new RollingSpectrum({ inputRateHz: 1000, frameSize: 300, overlap: 0, averages: 1, decimation: 1, fft })).toThrow(
      /FFT frame size must be a power of two between 32 and 4194304, got 300/,
    );
  });
});
