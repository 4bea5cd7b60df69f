/**
 * The warped spectra of one tachless frame, kept by slope until the next frame: the tracker's
 * slope search, its watch over the whole range and its steady average often ask for the same
 * slope of the same frame, and a spectrum is computed only once (the same numbers as computing
 * it again). With each spectrum, its noise floor and score contributions as far as an estimate
 * computed them (`SpectrumFloors`): the watch over the whole range reads again a frame the
 * search read over the track's neighbourhood, and extends them. Arrays are reused from one
 * frame to the next.
 */
import type { SpectrumFloors } from './speedFromSpectrum.ts';
import type { WarpedSpectrum } from './warpedSpectrum.ts';

export class FrameSpectra {
  private readonly warped: WarpedSpectrum;
  private readonly spectra: Float64Array[] = [];
  private readonly betas: number[] = [];
  private readonly floors: SpectrumFloors[] = [];
  private used = 0;
  /** Whether a spectrum of this frame has been computed (its source is in the kernel). */
  private computed = false;

  constructor(warped: WarpedSpectrum) {
    this.warped = warped;
  }

  /** A new frame: forget the spectra of the last. */
  begin(): void {
    this.used = 0;
    this.computed = false;
  }

  /** The amplitude per line of `src`'s frame around `centre` at slope `beta` (see WarpedSpectrum.compute). */
  at(src: Float32Array, centre: number, rateHz: number, beta: number): Float64Array {
    for (let i = 0; i < this.used; i++) if (this.betas[i] === beta) return this.spectra[i];
    // Within a frame the source does not change: the first spectrum copies it, the others reuse the copy.
    const amplitude = this.warped.compute(src, centre, rateHz, beta, this.computed);
    this.computed = true;
    if (this.spectra.length === this.used) {
      this.spectra.push(new Float64Array(amplitude.length));
      this.floors.push({ floor: new Float64Array(0), contrib: new Float64Array(0), upTo: 0 });
    }
    const kept = this.spectra[this.used];
    // Lines above the computed ones stay 0 in both.
    for (let k = 0; k < this.warped.lines; k++) kept[k] = amplitude[k];
    this.floors[this.used].upTo = 0;
    this.betas[this.used++] = beta;
    return kept;
  }

  /** The floors kept with a spectrum `at` returned in this frame. */
  floorsOf(amplitude: Float64Array): SpectrumFloors {
    const i = this.spectra.indexOf(amplitude);
    if (i < 0 || i >= this.used) throw new Error('FrameSpectra.floorsOf: not a spectrum of this frame');
    return this.floors[i];
  }
}
