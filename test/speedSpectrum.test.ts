import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { RollingSpectrum } from '../src/manipulation/rollingSpectrum.ts';
import { speedMovedTo } from '../src/manipulation/namedSpeed.ts';
import { estimateSpeedFromSpectrum } from '../src/manipulation/speedFromSpectrum.ts';
import { readFloatWav } from './support/readFloatWav.ts';

/**
 * Averaged Hann amplitude spectrum (RMS per line) of a whole signal, through the product's
 * RollingSpectrum: the spectrum the agent itself hands to the estimator.
 */
async function spectrumOf(
  x: Float32Array,
  sampleRateHz: number,
  frameSize: number,
  decimation: number,
): Promise<{ amplitude: Float64Array; binHz: number; frames: number }> {
  const fft = await createRealFft(frameSize, 'fftjs');
  const rs = new RollingSpectrum({ inputRateHz: sampleRateHz, frameSize, overlap: 0.5, averages: 1000, decimation, fft });
  const frames = rs.push(x, 0);
  const last = frames[frames.length - 1];
  if (!last) throw new Error(`signal of ${x.length} samples is shorter than one frame of ${frameSize * decimation}`);
  return { amplitude: last.amplitude, binHz: last.binHz, frames: last.averagedFrames };
}

/** Deterministic standard normal noise (mulberry32 + Box-Muller), so failures replay. */
function gaussian(seed: number): () => number {
  let s = seed >>> 0;
  const uniform = (): number => {
    s = (s + 0x6d2b79f5) >>> 0;
    let t = s;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return (((t ^ (t >>> 14)) >>> 0) + 0.5) / 4294967296;
  };
  return () => Math.sqrt(-2 * Math.log(uniform())) * Math.cos(2 * Math.PI * uniform());
}

const FS_HZ = 2048;
const FRAME = 8192; // 0.25 Hz lines at 2048 Hz
const DURATION_S = 10; // 4 frames at 50 % overlap

/** Sum of sines at k * f1Hz with the given peak amplitudes (index 0 = 1X), plus white noise. */
function machine(f1Hz: number, peaks: number[], noiseRms: number, seed: number, extra: [number, number][] = []): Float32Array {
  const n = FS_HZ * DURATION_S;
  const x = new Float32Array(n);
  const g = gaussian(seed);
  for (let i = 0; i < n; i++) {
    const t = i / FS_HZ;
    let v = noiseRms * g();
    peaks.forEach((a, k) => {
      v += a * Math.sin(2 * Math.PI * (k + 1) * f1Hz * t + 0.7 * k);
    });
    for (const [fHz, a] of extra) v += a * Math.sin(2 * Math.PI * fHz * t + 1.3);
    x[i] = v;
  }
  return x;
}

function expectRpm(got: number | null, wantRpm: number, relTol: number, what: string, reason: string): void {
  expect(got, `${what}: expected ${wantRpm} rpm, got null (${reason})`).not.toBeNull();
  const rel = Math.abs((got as number) - wantRpm) / wantRpm;
  expect(
    rel,
    `${what}: expected ${wantRpm} rpm, got ${got} rpm, error ${(rel * 100).toFixed(4)} %, tolerance ${(relTol * 100).toFixed(3)} % (${reason})`,
  ).toBeLessThanOrEqual(relTol);
}

describe('estimateSpeedFromSpectrum on synthetic spectra', () => {
  // Expected values are the frequencies the signals were built with. Tolerance 0.05 %: at
  // 0.25 Hz lines that is 0.05 line at 25 Hz; the Hann three-line estimator is exact for a lone
  // tone (derivation in the source) and noise 40 dB down moves it by a few thousandths of a line.

  it('a clean 1X, 2X, 3X family gives 1X with high confidence', async () => {
    const f1 = 24.37;
    const { amplitude, binHz } = await spectrumOf(machine(f1, [1, 0.5, 0.3], 0.05, 1), FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [600, 3600]);
    expectRpm(e.rpm, f1 * 60, 5e-4, 'clean family', e.reason);
    expect(e.supportingHarmonics).toBe(3);
    // Design target: an unambiguous family clears the default min_confidence 0.6 comfortably.
    expect(e.confidence, e.reason).toBeGreaterThan(0.8);
  });

  it('strong 2X with a weak 1X inside the range gives 1X, not 2X', async () => {
    // 2X (48.74 Hz = 2924 rpm) lies inside the range and is 40 dB above the 1X.
    const f1 = 24.37;
    const x = machine(f1, [0.01, 1, 0, 0.3], 0.05, 2);
    const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [600, 3600]);
    expectRpm(e.rpm, f1 * 60, 5e-4, 'weak 1X under strong 2X', e.reason);
    expect(e.reason).toMatch(/2X/);
  });

  it('a half-frequency line with odd-harmonic support makes the half frequency 1X', async () => {
    // Lines at 0.5, 1, 1.5, 2 x 40 Hz: 20 Hz is the shaft, 40 Hz its dominant 2X.
    const x = machine(20, [0.05, 1, 0.04, 0.5], 0.05, 3);
    const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [600, 3600]);
    expectRpm(e.rpm, 1200, 5e-4, 'odd harmonics of half', e.reason);
    expect(e.supportingHarmonics).toBe(4);
  });

  it('a family with nothing at half its frequency is not halved', async () => {
    // 1X at 40 Hz (2400 rpm) with harmonics; 20 Hz is inside the range but holds only noise.
    const x = machine(40, [1, 0.6, 0.4, 0.3, 0.2], 0.05, 4);
    const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [600, 3600]);
    expectRpm(e.rpm, 2400, 5e-4, 'no subharmonic', e.reason);
    expect(e.confidence, e.reason).toBeGreaterThan(0.8);
  });

  it('noise only gives null or a low confidence', async () => {
    for (const seed of [5, 6, 7]) {
      const x = machine(25, [], 1, seed);
      const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
      const e = estimateSpeedFromSpectrum(amplitude, binHz, [600, 3600]);
      // Design target: below 0.3, well under the default min_confidence 0.6.
      if (e.rpm !== null) expect(e.confidence, `seed ${seed}: ${e.rpm} rpm, ${e.reason}`).toBeLessThan(0.3);
      else expect(e.confidence).toBe(0);
    }
  });

  it('two unrelated families of equal strength give a low confidence', async () => {
    // Motor at 24.37 Hz and a belt-driven fan at 17.13 Hz, same amplitudes.
    const fan = 17.13;
    const x = machine(24.37, [1, 0.5, 0.3], 0.05, 8, [
      [fan, 1],
      [2 * fan, 0.5],
      [3 * fan, 0.3],
    ]);
    const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [600, 3600]);
    expect(e.confidence, `${e.rpm} rpm, ${e.reason}`).toBeLessThan(0.3);
  });

  it('speed exactly at the top of the range', async () => {
    const x = machine(30, [1, 0.4, 0.2], 0.05, 9);
    const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [900, 1800]);
    expectRpm(e.rpm, 1800, 5e-4, 'at max of range', e.reason);
  });

  it('speed exactly at the bottom of the range', async () => {
    const x = machine(30, [1, 0.4, 0.2], 0.05, 10);
    const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
    const e = estimateSpeedFromSpectrum(amplitude, binHz, [1800, 3600]);
    expectRpm(e.rpm, 1800, 5e-4, 'at min of range', e.reason);
  });

  it('refuses a resolution too coarse for the range, saying what it needs', () => {
    const e = estimateSpeedFromSpectrum(new Float64Array(513), 2, [600, 3600]);
    expect(e.rpm).toBeNull();
    expect(e.reason).toMatch(/binHz <= 1\.25/);
  });

  it('empty spectrum, NaN line and bad options give null with a reason', () => {
    expect(estimateSpeedFromSpectrum(new Float64Array(0), 0.25, [600, 3600]).reason).toMatch(/beyond the spectrum/);
    const a = new Float64Array(4097).fill(1e-3);
    a[100] = Number.NaN;
    expect(estimateSpeedFromSpectrum(a, 0.25, [600, 3600]).reason).toMatch(/line 100 is NaN/);
    expect(estimateSpeedFromSpectrum(a, 0.25, [3600, 600]).reason).toMatch(/rangeRpm/);
    expect(estimateSpeedFromSpectrum(a, 0.25, [600, 3600], { harmonics: 0 }).reason).toMatch(/harmonics/);
    const flat = new Float64Array(4097).fill(1e-3);
    const e = estimateSpeedFromSpectrum(flat, 0.25, [600, 3600]);
    expect(e.rpm).toBeNull();
    expect(e.confidence).toBe(0);
  });

  it('the speed alone is the full answer without its confidence, over the same spectrum kept floors or not; a named speed moved keeps its reason', async () => {
    const cases: [Float32Array, [number, number]][] = [
      [machine(20, [1, 0.5, 0.3], 0.05, 3), [600, 3600]],
      [machine(24, [0.05, 1, 0.2, 0.3], 0.05, 4), [600, 3600]],
      [machine(17, [0.3, 0.2, 0.2], 0.2, 5, [[41, 0.6]]), [900, 2400]],
      [machine(20, [], 0.1, 6), [600, 3600]],
    ];
    let named = 0;
    for (const [x, range] of cases) {
      const { amplitude, binHz } = await spectrumOf(x, FS_HZ, FRAME, 1);
      const full = estimateSpeedFromSpectrum(amplitude, binHz, range);
      // Floors kept from a reading of the lower half of the range, then extended.
      const floors = { floor: new Float64Array(0), contrib: new Float64Array(0), upTo: 0 };
      estimateSpeedFromSpectrum(amplitude, binHz, [range[0], (range[0] + range[1]) / 2], { floors });
      const extended = estimateSpeedFromSpectrum(amplitude, binHz, range, { floors, speedOnly: true });
      for (const alone of [estimateSpeedFromSpectrum(amplitude, binHz, range, { speedOnly: true }), extended]) {
        expect(alone.rpm).toBe(full.rpm);
        expect(alone.supportingHarmonics).toBe(full.supportingHarmonics);
        if (full.rpm === null) expect(alone.confidence).toBe(0);
        else expect(alone.confidence).toBeNaN();
      }
      if (full.rpm !== null) {
        named++;
        expect(full.reason).toMatch(/^1X at \d+\.\d{3} Hz from \d of 5 harmonics; strength \d\.\d\d, uniqueness \d\.\d\d/);
        const moved = speedMovedTo(full, full.rpm + 12.5);
        expect([moved.rpm, moved.confidence, moved.supportingHarmonics, moved.reason]).toEqual([full.rpm + 12.5, full.confidence, full.supportingHarmonics, full.reason]);
      }
    }
    expect(named).toBeGreaterThanOrEqual(3);
  });
});

// ---------------------------------------------------------------------------------------------
// Real recordings (manifest.json beside them gives each file's recorded speed).

const RECORDINGS = new URL('../../shared/data/recordings/', import.meta.url);
const haveRecordings = existsSync(fileURLToPath(new URL('manifest.json', RECORDINGS)));
if (!haveRecordings) {
  console.warn(`speedSpectrum.test.ts: recordings not found at ${fileURLToPath(RECORDINGS)}; tachless checks on real data skipped`);
}

interface ManifestEntry {
  source: string;
  fs_hz: number;
  rpm?: number;
  shaft_hz?: number;
}

/**
 * Analysis settings for the recordings: decimate to about 3 kHz (16 x for 48 kHz, 4 x for
 * 12 kHz), 8192-point frames, 50 % overlap, all frames of the record averaged. Lines are then
 * 0.366 Hz (0.373 Hz for MFPT): 0.5 % of a 1X near 30 Hz is 0.15 Hz = 0.41 line, and the
 * estimator's interpolation and harmonic fit are good to about 0.1 line. A finer frame (16384)
 * would leave the 5 s CWRU 48 kHz records a single unaveraged frame.
 */
const FRAME_REC = 8192;
function decimationFor(fsHz: number): number {
  let d = 1;
  while (fsHz / (2 * d) >= 2900) d *= 2;
  return d;
}

describe.skipIf(!haveRecordings)('estimateSpeedFromSpectrum on the open recordings', () => {
  const manifest = haveRecordings
    ? (JSON.parse(readFileSync(new URL('manifest.json', RECORDINGS), 'utf8')) as { recordings: Record<string, ManifestEntry> })
    : { recordings: {} };
  const names = Object.keys(manifest.recordings);

  // Two operating ranges: a +-33 % variable-speed band around a 4-pole motor's 1800 rpm, and a
  // 6:1 band that holds 0.5X, 1X and 2X of the CWRU motor, so octave errors would show.
  const ranges: [number, number][] = [
    [1200, 2400],
    [600, 3600],
  ];

  for (const name of names) {
    const entry = manifest.recordings[name];
    const cwru = entry.source === 'cwru';
    // CWRU: the rpm recorded with each file (manifest), tolerance 0.5 % as asked of tachless
    // speed; the recorded rpm is itself a 1-rpm reading of an induction motor whose slip moves.
    // MFPT: the data set states its shaft rate as "25 Hz" (manifest sources.mfpt), a nominal
    // figure given to the whole hertz with no measured value or accuracy. Read as rounded to its
    // last stated digit, the true rate lies within 25 +- 0.5 Hz: tolerance 2 %, taken from the
    // stated figure alone (the estimator's own error, about 0.1 of a 0.373 Hz line, is far inside).
    const wantRpm = entry.rpm ?? (entry.shaft_hz as number) * 60;
    const relTol = cwru ? 5e-3 : 0.5 / 25;
    for (const range of ranges) {
      it(`${name}: 1X within ${relTol * 100} % of ${wantRpm} rpm, range [${range.join(', ')}] rpm`, async () => {
        const rec = await readFloatWav(fileURLToPath(new URL(name, RECORDINGS)));
        const { amplitude, binHz, frames } = await spectrumOf(rec.samples, rec.sampleRateHz, FRAME_REC, decimationFor(rec.sampleRateHz));
        const e = estimateSpeedFromSpectrum(amplitude, binHz, range);
        const errPct = e.rpm === null ? Number.NaN : ((e.rpm - wantRpm) / wantRpm) * 100;
        console.log(
          `[speed] ${name} range [${range.join(', ')}]: ${e.rpm?.toFixed(1)} rpm vs ${wantRpm} (${errPct.toFixed(3)} %), ` +
            `confidence ${e.confidence.toFixed(2)}, ${e.supportingHarmonics} harmonics, binHz ${binHz.toFixed(3)}, ${frames} frames; ${e.reason}`,
        );
        expectRpm(e.rpm, wantRpm, relTol, name, e.reason);
        // The CWRU records show a clear 1X family; inside the narrower range it should clear the
        // default min_confidence (0.6) so the agent would use it. The wide range lets bearing
        // and structural line families compete, which rightly lowers confidence; not asserted.
        // MFPT confidence is reported only: its inner-race record has one weak shaft line.
        if (cwru && range[0] === 1200) expect(e.confidence, e.reason).toBeGreaterThanOrEqual(0.6);
      });
    }
  }
});
