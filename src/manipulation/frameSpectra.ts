/**
 * The warped spectra of one tachless frame, kept by slope until the next frame: the tracker's
 * slope search, its watch over the whole range and its steady average often ask for the same
 * slope of the same frame, and a spectrum is computed only once (the same numbers as computing
 * it again). Arrays are reused from one frame to the next.
 */
import type { WarpedSpectrum } from './warpedSpectrum.ts';

export class FrameSpectra {
  private readonly warped: WarpedSpectrum;
  private readonly spectra: Float64Array[] = [];
  private readonly betas: number[] = [];
  private used = 0;

  constructor(warped: WarpedSpectrum) {
    this.warped = warped;
  }

  /** A new frame: forget the spectra of the last. */
  begin(): void {
    this.used = 0;
  }

  /** The amplitude per line of `src`'s frame around `centre` at slope `beta` (see WarpedSpectrum.compute). */
  at(src: Float32Array, centre: number, rateHz: number, beta: number): Float64Array {
    for (let i = 0; i < this.used; i++) if (this.betas[i] === beta) return this.spectra[i];
    const amplitude = this.warped.compute(src, centre, rateHz, beta);
    if (this.spectra.length === this.used) this.spectra.push(new Float64Array(amplitude.length));
    const kept = this.spectra[this.used];
    kept.set(amplitude);
    this.betas[this.used++] = beta;
    return kept;
  }
}
