/**
 * The spectra's side of the engine: the analysis geometry (frame length, line spacing, the span
 * an average covers) and the queue of spectra waiting to be read. Spectra are read (order
 * amplitudes, severity, each pair's reference outside its band) in time order inside the
 * decision loop, once every channel and the speed have reached the spectrum's end: the result
 * then does not depend on the order in which channels or blocks arrived.
 */
import type { AssetConfig } from '../config/types.ts';
import { bandPosition } from '../detection/bandPosition.ts';
import type { SpectrumFrame } from '../manipulation/rollingSpectrum.ts';
import type { SpeedAt } from '../manipulation/speedTrack.ts';
import { roundTimeS } from './engineRecords.ts';
import type { PairState } from './pairState.ts';
import type { SensorAnalysis } from './sensorAnalysis.ts';

/** Spare spectrum copies kept at most (a burst of queued spectra beyond it is left to the GC). */
const MAX_SPARE = 256;

export class SpectrumEvidence {
  private readonly asset: AssetConfig;
  private readonly pending: Array<{ sensor: SensorAnalysis; frame: SpectrumFrame }> = [];
  /**
   * Copies of read or dropped spectra, reused for the next queued ones: a fresh 4097-line array
   * per spectrum was measured as a share of the live agent's garbage collection. Nothing keeps a
   * queued spectrum's array after it is read (sensorAnalysis converts it into its own array).
   */
  private readonly spare: Float64Array[] = [];
  /** Frame length (s), line spacing (Hz) and analysis rate (Hz); 0 until a spectrum is built. */
  frameS = 0;
  binHz = 0;
  analysisRateHz = 0;
  /** Spectra read, and spectra skipped because a sample in them was not finite. */
  spectraCount = 0;
  nonFiniteSpectra = 0;

  constructor(asset: AssetConfig) {
    this.asset = asset;
  }

  /** A sensor's spectrum was (re)built at this analysis rate. Returns warnings about resolution. */
  built(rateHz: number): string[] {
    this.analysisRateHz = rateHz;
    this.frameS = this.asset.analysis.frameSize / rateHz;
    this.binHz = rateHz / this.asset.analysis.frameSize;
    const warnings: string[] = [];
    for (const c of this.asset.components) {
      const widthHz = c.bandHz[1] - c.bandHz[0];
      if (this.binHz > widthHz / 2) {
        warnings.push(
          `spectral line spacing ${this.binHz.toFixed(3)} Hz is coarse against the ${widthHz.toFixed(3)} Hz band of ${c.id}: amplitudes near it are approximate (raise analysis.frame_size or decimation)`,
        );
      }
    }
    return warnings;
  }

  /** Data time covered by an average of `frames` frames: the first one's start to the last one's end. */
  averagingSpanS(frames: number = this.asset.analysis.averages): number {
    return this.frameS * (1 + (frames - 1) * (1 - this.asset.analysis.overlap));
  }

  queue(sensor: SensorAnalysis, produced: SpectrumFrame): void {
    // The spectrum may reuse its output arrays on its next push; a queued frame keeps a copy.
    const copy = this.spare.pop();
    const amplitude = copy !== undefined && copy.length === produced.amplitude.length ? copy : new Float64Array(produced.amplitude.length);
    amplitude.set(produced.amplitude);
    const frame = { ...produced, amplitude };
    const q = this.pending;
    let i = q.length;
    while (i > 0 && q[i - 1].frame.tEndS > frame.tEndS) i--;
    q.splice(i, 0, { sensor, frame });
  }

  drop(sensor: SensorAnalysis): void {
    for (const f of this.pending) if (f.sensor === sensor) this.release(f.frame.amplitude);
    this.pending.splice(0, this.pending.length, ...this.pending.filter((f) => f.sensor !== sensor));
  }

  private release(amplitude: Float64Array): void {
    if (this.spare.length < MAX_SPARE) this.spare.push(amplitude);
  }

  /** Reads every queued spectrum that ends by `tS` (within `epsS`), oldest first. */
  readUpTo(tS: number, epsS: number, speedAt: (tS: number) => SpeedAt, pairs: readonly PairState[], warn: (m: string) => void): void {
    const q = this.pending;
    let n = 0;
    while (n < q.length && q[n].frame.tEndS <= tS + epsS) {
      this.read(q[n].sensor, q[n].frame, speedAt, pairs, warn);
      this.release(q[n].frame.amplitude);
      n++;
    }
    if (n > 0) q.splice(0, n);
  }

  private read(
    sensor: SensorAnalysis,
    frame: SpectrumFrame,
    speedAt: (tS: number) => SpeedAt,
    pairs: readonly PairState[],
    warn: (m: string) => void,
  ): void {
    this.spectraCount++;
    const spanS = this.averagingSpanS(frame.averagedFrames);
    const centreS = frame.tEndS - spanS / 2;
    // Order amplitudes are read at the speed of the span's middle, and only when the speed was
    // known over the whole span (its start, middle and end).
    const speed = speedAt(centreS);
    const spanStart = speedAt(frame.tEndS - spanS);
    const spanEnd = speedAt(frame.tEndS);
    const known = speed.rpm !== null && spanStart.rpm !== null && spanEnd.rpm !== null;
    const rpms = known ? [speed.rpm as number, spanStart.rpm as number, spanEnd.rpm as number] : [];
    const shaftHz = known ? (speed.rpm as number) / 60 : null;
    const driftShaftHz = known ? (Math.max(...rpms) - Math.min(...rpms)) / 60 : 0;
    if (!sensor.measure(frame, shaftHz, driftShaftHz, warn)) {
      this.nonFiniteSpectra++;
      return;
    }
    if (shaftHz === null || speed.rpm === null) return;
    // Remember each order's amplitude outside each band as the reference for in-band evidence.
    for (const pair of pairs) {
      if (!pair.component.sensorIds.includes(sensor.config.id)) continue;
      const amplitude = sensor.orderAmplitude[pair.orderIndex];
      if (!Number.isFinite(amplitude)) continue;
      const orderHz = pair.order.multiple * shaftHz;
      if (bandPosition(orderHz, pair.component.bandHz, pair.deadbandHz) === 'outside') {
        pair.outside = { velocity_rms_mm_s: amplitude, speed_rpm: speed.rpm, t_s: roundTimeS(centreS) };
      }
    }
  }
}
