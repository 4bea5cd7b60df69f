import { existsSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, it } from 'vitest';
import { hannWindow } from '../src/manipulation/hannWindow.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { RollingSpectrum, type SpectrumFrame } from '../src/manipulation/rollingSpectrum.ts';
import { bandRms, interpolatePeak } from '../src/manipulation/spectrumMath.ts';
import { expectClose, expectRelClose } from './support/signals.ts';
import { readFloatWav } from './support/readFloatWav.ts';

// Checks against an open recording (CWRU drive-end normal baseline, 48 kHz, units g) and the
// values in its manifest.json.
const dir = new URL('../../shared/data/recordings/', import.meta.url);
const file = new URL('cwru-de-normal-48k.wav', dir);
const present = existsSync(fileURLToPath(file));
if (!present) console.warn(`spectrum recording tests skipped: ${fileURLToPath(file)} not found`);

describe.skipIf(!present)('spectrum of the CWRU normal-baseline recording', () => {
  async function averagedSpectrum(): Promise<SpectrumFrame> {
    const { sampleRateHz: rateHz, samples } = await readFloatWav(fileURLToPath(file));
    const frameSize = 16_384; // 2.93 Hz lines at 48 kHz; 14 frames in the file
    const rs = new RollingSpectrum({
      inputRateHz: rateHz,
      frameSize,
      overlap: 0,
      averages: Math.floor(samples.length / frameSize),
      decimation: 1,
      fft: await createRealFft(frameSize),
    });
    return rs.push(samples, 0).at(-1) as SpectrumFrame;
  }

  it('band RMS over all lines equals the manifest RMS after mean removal (0.072687 g)', async () => {
    // Manifest rms_g_ac 0.072687 g is over the whole file; the spectrum averages 14 Hann frames
    // covering 94 % of it. Tolerance 1 %: the frames weight the record unevenly. Measured: 0.05 %.
    const f = await averagedSpectrum();
    const rms = bandRms(f.amplitude, f.binHz, 0, f.sampleRateHz / 2, hannWindow(16_384).enbwBins);
    expectRelClose('broadband RMS, g', rms, 0.072687, 0.01);
  });

  it('finds the 1X line near 29.93 Hz (1796 rpm recorded with the file)', async () => {
    // Manifest: "1X line near 29.93 Hz". Tolerance 0.15 Hz, 5 % of a line: the line sits in
    // noise and the recorded rpm is a single reading. Measured: 29.917 Hz.
    const f = await averagedSpectrum();
    const p = interpolatePeak(f.amplitude, f.binHz, 1796 / 60, 1.5);
    expectClose('1X frequency, Hz', p?.freqHz ?? Number.NaN, 1796 / 60, 0.15);
  });
});
