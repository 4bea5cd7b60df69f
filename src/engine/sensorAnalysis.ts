/**
 * The spectral analysis of one sensor inside the engine: its rolling spectrum, built at the
 * rate of the first block (and rebuilt after a reset), and what each evaluated spectrum says:
 * the broadband severity and the amplitude of every order.
 *
 * Spectra are amplitude-correct RMS lines of acceleration; they are converted to velocity in
 * mm/s before anything is read from them.
 */
import type { SeverityEntry } from '../advisory/records.ts';
import type { AssetConfig, SensorConfig } from '../config/types.ts';
import type { RealFft } from '../manipulation/realFft.ts';
import { RollingSpectrum, type SpectrumFrame } from '../manipulation/rollingSpectrum.ts';
import { accelerationToVelocityMmS, interpolatePeak } from '../manipulation/spectrumMath.ts';
import { broadbandVelocityRmsMmS, SEVERITY_BAND_HZ, zoneOf } from '../manipulation/velocitySeverity.ts';
import { chooseDecimation } from './chooseDecimation.ts';

/** Orders above this share of the analysis Nyquist frequency are not measured (filter edge). */
const USABLE_NYQUIST_SHARE = 0.8;

export class SensorAnalysis {
  readonly config: SensorConfig;
  /** Latest order amplitude (velocity RMS, mm/s) and line frequency per order index; NaN when not measured. */
  readonly orderAmplitude: Float64Array;
  readonly orderLineHz: Float64Array;
  severity: SeverityEntry | null = null;
  severityMax: SeverityEntry | null = null;
  decimation = 1;
  private spectrum: RollingSpectrum | null = null;
  private readonly velocityMmS: Float64Array;
  private scratch = new Float32Array(0);
  private readonly outputPool: Float64Array[] | undefined;
  private readonly asset: AssetConfig;
  private readonly fft: RealFft;

  /**
   * `shared`: what the engine's sensors share, each using it within one call: a velocity
   * spectrum of frameSize / 2 + 1 doubles (measure()) and the spectra's output arrays (each
   * frame is copied out before the next push, spectrumEvidence.ts).
   */
  constructor(config: SensorConfig, asset: AssetConfig, fft: RealFft, shared?: { velocity: Float64Array; outputPool: Float64Array[] }) {
    this.config = config;
    this.asset = asset;
    this.fft = fft;
    this.orderAmplitude = new Float64Array(asset.orders.length).fill(Number.NaN);
    this.orderLineHz = new Float64Array(asset.orders.length).fill(Number.NaN);
    const lines = asset.analysis.frameSize / 2 + 1;
    this.velocityMmS = shared?.velocity.length === lines ? shared.velocity : new Float64Array(lines);
    this.outputPool = shared?.outputPool;
  }

  /**
   * Feeds a block (raw samples; the sensor's scale is applied here). Returns the spectra it
   * completes, and the analysis rate when the spectrum was (re)built by this block.
   */
  push(t0S: number, sampleRateHz: number, samples: Float32Array): { frames: SpectrumFrame[]; builtAtHz: number | null } {
    let builtAtHz: number | null = null;
    if (!this.spectrum) {
      const analysis = this.asset.analysis;
      this.decimation = analysis.decimation === 'auto' ? chooseDecimation(sampleRateHz, this.asset) : analysis.decimation;
      this.spectrum = new RollingSpectrum({
        inputRateHz: sampleRateHz,
        frameSize: analysis.frameSize,
        overlap: analysis.overlap,
        averages: analysis.averages,
        decimation: this.decimation,
        fft: this.fft,
        outputPool: this.outputPool,
      });
      builtAtHz = sampleRateHz / this.decimation;
    }
    let scaled = samples;
    if (this.config.scale !== 1) {
      // The spectrum copies what it is given, so one scratch buffer serves every block.
      if (this.scratch.length < samples.length) this.scratch = new Float32Array(samples.length);
      scaled = this.scratch.subarray(0, samples.length);
      for (let i = 0; i < samples.length; i++) scaled[i] = samples[i] * this.config.scale;
    }
    return { frames: this.spectrum.push(scaled, t0S), builtAtHz };
  }

  /** Forget the signal history (after a gap, a rate change, or while spectra are shed). */
  forget(): void {
    this.spectrum?.dispose();
    this.spectrum = null;
    this.severity = null;
    this.orderAmplitude.fill(Number.NaN);
    this.orderLineHz.fill(Number.NaN);
  }

  /**
   * Reads an evaluated spectrum: severity always; order amplitudes at `shaftHz` when the speed is
   * known and was steady over the averaging span (`driftShaftHz`: how far the shaft frequency
   * moved): an order that moved by more than one line is smeared over several and would read
   * low. Returns false for a spectrum spoilt by a non-finite sample (it says nothing).
   */
  /**
   * How many lines from DC up measure() reads of the velocity spectrum: the severity band's top
   * line, and each order's search window with the line beyond it (the peak's neighbour). The
   * rest of a frame (most of it, from a full-rate analysis) is not converted.
   */
  private linesRead(binHz: number, hiHz: number, shaftHz: number | null, nyquistHz: number): number {
    let topHz = hiHz;
    if (shaftHz !== null) {
      for (const order of this.asset.orders) {
        const orderHz = order.multiple * shaftHz;
        if (orderHz < nyquistHz * USABLE_NYQUIST_SHARE) topHz = Math.max(topHz, orderHz + orderHalfWidthHz(orderHz, binHz));
      }
    }
    return Math.floor(topHz / binHz + 1e-9) + 2;
  }

  measure(frame: SpectrumFrame, shaftHz: number | null, driftShaftHz: number, warn: (message: string) => void): boolean {
    this.orderAmplitude.fill(Number.NaN);
    this.orderLineHz.fill(Number.NaN);
    if (!Number.isFinite(frame.amplitude[1])) return false;
    const velocity = this.velocityMmS;
    const nyquistHz = frame.sampleRateHz / 2;
    const [loHz, topHz] = SEVERITY_BAND_HZ;
    const hiHz = Math.min(topHz, nyquistHz);
    accelerationToVelocityMmS(frame.amplitude, frame.binHz, this.config.units, velocity, undefined, this.linesRead(frame.binHz, hiHz, shaftHz, nyquistHz));
    if (hiHz <= loHz) {
      // Nothing of the band is below half the analysis rate: no severity, and say why.
      warn(
        `analysis rate ${formatHz(frame.sampleRateHz)} Hz is too low for the severity band: half of it, ${formatHz(nyquistHz)} Hz, is below the band's lower edge of ${loHz} Hz, so no severity is measured (ISO 20816 asks for ${loHz}-${topHz} Hz)`,
      );
    } else {
      if (hiHz < topHz) {
        warn(`analysis rate ${formatHz(frame.sampleRateHz)} Hz limits the severity band to ${loHz}-${formatHz(hiHz)} Hz (ISO 20816 asks for ${loHz}-${topHz} Hz)`);
      }
      const rms = broadbandVelocityRmsMmS(velocity, frame.binHz, loHz, hiHz);
      const entry: SeverityEntry = {
        sensor: this.config.id,
        velocity_rms_mm_s: rms,
        zone: zoneOf(rms, this.asset.severity.zoneBoundariesMmS),
        zone_basis: this.asset.severity.basis,
        band_hz: [loHz, hiHz],
      };
      this.severity = entry;
      if (!this.severityMax || rms > this.severityMax.velocity_rms_mm_s) this.severityMax = entry;
    }
    if (shaftHz === null) return true;
    this.asset.orders.forEach((order, i) => {
      const orderHz = order.multiple * shaftHz;
      if (orderHz >= nyquistHz * USABLE_NYQUIST_SHARE) return;
      if (order.multiple * driftShaftHz > frame.binHz) return;
      const halfWidthHz = orderHalfWidthHz(orderHz, frame.binHz);
      const peak = interpolatePeak(velocity, frame.binHz, orderHz, halfWidthHz);
      if (!peak) return;
      this.orderAmplitude[i] = peak.amplitude;
      this.orderLineHz[i] = peak.freqHz;
    });
    return true;
  }
}

/** Half the width of the window an order's line is looked for in (Hz). */
function orderHalfWidthHz(orderHz: number, binHz: number): number {
  return Math.max(2 * binHz, 0.02 * orderHz);
}

/** A frequency with at most three decimals and no trailing zeros: 1000, 0.5, 12.8. */
function formatHz(hz: number): string {
  return String(Number(hz.toFixed(3)));
}
