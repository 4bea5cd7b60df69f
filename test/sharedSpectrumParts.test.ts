/**
 * What spectra share to save memory per sensor (the kernel's work buffers, the decimator's
 * output scratch, the output arrays of an engine's sensors) changes no number: several rolling
 * spectra fed different signals block by block in turn, sharing one output pool and each frame
 * copied out before the next push (as the engine does), give bit for bit the frames of the same
 * spectra run one after another, each with its own arrays.
 */
import { describe, expect, it } from 'vitest';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { RollingSpectrum } from '../src/manipulation/rollingSpectrum.ts';
import { gaussianNoise } from './support/signals.ts';

const FS = 25_600;
const N = 1024;

describe('shared spectrum parts', () => {
  it('spectra taking turns over shared arrays give the frames each gives alone', async () => {
    const fft = await createRealFft(N);
    const configs = [8, 8, 2, 1].map((decimation, i) => ({ decimation, signal: gaussianNoise(40_000, 1 + i, 31 + i) }));
    const blocks = [2560, 7, 4099, 1, 2560, 513, 9000, 12000, 5000];
    const spectrum = (decimation: number, outputPool?: Float64Array[]): RollingSpectrum =>
      new RollingSpectrum({ inputRateHz: FS, frameSize: N, overlap: 0.5, averages: 4, decimation, fft, outputPool });

    // Alone: one spectrum at a time, its own output arrays.
    const alone = configs.map(({ decimation, signal }) => {
      const s = spectrum(decimation);
      const frames: Float64Array[] = [];
      let at = 0;
      for (const n of blocks) {
        for (const f of s.push(signal.subarray(at, at + n), at / FS)) frames.push(Float64Array.from(f.amplitude));
        at += n;
      }
      return frames;
    });

    // Taking turns block by block, one shared output pool.
    const pool: Float64Array[] = [];
    const shared = configs.map(({ decimation }) => spectrum(decimation, pool));
    const turns: Float64Array[][] = configs.map(() => []);
    let at = 0;
    for (const n of blocks) {
      shared.forEach((s, i) => {
        for (const f of s.push(configs[i].signal.subarray(at, at + n), at / FS)) turns[i].push(Float64Array.from(f.amplitude));
      });
      at += n;
    }

    for (let i = 0; i < configs.length; i++) {
      expect(turns[i].length, `spectrum ${i}: frames`).toBe(alone[i].length);
      expect(alone[i].length).toBeGreaterThan(5);
      for (let k = 0; k < alone[i].length; k++) {
        for (let j = 0; j < N / 2 + 1; j++) {
          if (!Object.is(turns[i][k][j], alone[i][k][j])) expect.fail(`spectrum ${i}, frame ${k}, line ${j}: ${turns[i][k][j]} against ${alone[i][k][j]}`);
        }
      }
    }
    expect(pool.length, 'one shared array serves a push of one frame').toBeLessThanOrEqual(Math.max(...blocks) / (N / 2) + 1);
  });
});
