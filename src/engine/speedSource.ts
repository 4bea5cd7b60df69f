/**
 * The speed side of the engine: where the shaft speed at a data time comes from, and how far
 * behind the samples that answer may still arrive.
 *
 * One of: a known speed series (replay `--speed`), tach pulses (TachSpeed, averaged over a few
 * revolutions), tachless estimates from the speed sensor's own speed path (TachlessTracker:
 * short warped frames that follow ramps, separate from the sensor's evidence spectra), or
 * records pushed from a speed topic. All of them land in one SpeedTrack, which answers "the speed at t, or unknown".
 * The speed evidence time (the latest data time the source has spoken for) holds the decision
 * watermark back until a speed for the decision time can have arrived.
 */
import type { AssetConfig } from '../config/types.ts';
import { TachlessTracker } from '../manipulation/tachlessTracker.ts';
import { TachSpeed } from '../manipulation/speedFromTach.ts';
import type { RealFft } from '../manipulation/realFft.ts';
import type { SpeedPoint } from '../manipulation/speedPoint.ts';
import { SpeedAverage } from '../manipulation/speedAverage.ts';
import { SpeedTrack, type SpeedAt } from '../manipulation/speedTrack.ts';

/** Revolutions in each tach speed point (see speedAverage.ts for why). */
const TACH_AVERAGE_REVS = 4;

export class SpeedSource {
  private readonly asset: AssetConfig;
  private readonly track: SpeedTrack;
  private readonly series: SpeedTrack | null;
  private tach: TachSpeed | null = null;
  private readonly tachAverage = new SpeedAverage(TACH_AVERAGE_REVS);
  private tracker: TachlessTracker | null = null;
  /** Latest data time for which the speed source has said something (tach, spectral or topic). */
  private evidenceS = Number.NEGATIVE_INFINITY;

  /** The engine's transform: the tachless tracker's frames take its backend. */
  private readonly fft: RealFft | undefined;

  /**
   * `series`: a known speed series, sorted by time; it replaces the map's speed source. `fft`:
   * the engine's transform, whose backend the tachless tracker uses (fft.js when absent).
   */
  constructor(asset: AssetConfig, series?: readonly SpeedPoint[], fft?: RealFft) {
    this.asset = asset;
    this.fft = fft;
    this.track = new SpeedTrack({ maxAgeS: asset.speed.maxAgeS, minConfidence: asset.speed.minConfidence });
    this.series = null;
    if (series) {
      const track = new SpeedTrack({ maxAgeS: asset.speed.maxAgeS, minConfidence: 0, capacity: series.length + 1 });
      for (const p of series) track.add(p);
      this.series = track;
    }
  }

  /** True when a known series replaces the map's speed source. */
  get fromSeries(): boolean {
    return this.series !== null;
  }

  /** The tach channel the engine must read, or null when speed comes from elsewhere. */
  get tachChannel(): number | null {
    return this.asset.speed.source === 'tach' && !this.series ? (this.asset.speed.channel as number) : null;
  }

  /** True when this sensor's spectrum gives the speed (tachless source, no series). */
  isSpeedSensor(sensorId: string): boolean {
    return this.asset.speed.source === 'spectrum' && !this.series && this.asset.speed.sensor === sensorId;
  }

  /** What status and summary records name as the speed source. */
  sourceName(speed: SpeedAt): string {
    return this.series ? 'series' : speed.source ?? this.asset.speed.source;
  }

  get configuredSourceName(): string {
    return this.series ? 'series' : this.asset.speed.source;
  }

  at(tS: number): SpeedAt {
    return (this.series ?? this.track).at(tS);
  }

  /** A speed record (speed source `topic`): points may arrive out of step with the samples. */
  addPoint(point: SpeedPoint): void {
    this.track.add(point);
    this.evidenceS = Math.max(this.evidenceS, point.tS);
  }

  /**
   * Tach samples: each revolution completed gives (through the average) a speed point. Returns
   * the completed revolutions themselves (each stamped at the mark that ends it), for the
   * shaft angle of transient capture.
   */
  pushTach(t0S: number, sampleRateHz: number, samples: Float32Array): SpeedPoint[] {
    if (!this.tach) {
      this.tach = new TachSpeed({
        sampleRateHz,
        pulsesPerRev: this.asset.speed.pulsesPerRev,
        rangeRpm: this.asset.speed.rangeRpm,
      });
    }
    const revs = this.tach.push(samples, t0S);
    for (const rev of revs) this.addPoint(this.tachAverage.push(rev));
    return revs;
  }

  /** Forget the tach's edges (after a gap); it is rebuilt on the next block. */
  resetTach(): void {
    this.tach = null;
    this.tachAverage.reset();
  }

  /**
   * Samples of the speed sensor (source `spectrum`): the tracker is built at the rate of the
   * first block (and rebuilt after a reset); each estimate it completes is a speed point at the
   * centre of its frame. An estimate with no 1X still says the source has spoken for that time.
   */
  pushSpeedSensor(t0S: number, sampleRateHz: number, samples: Float32Array): void {
    if (!this.tracker) {
      this.tracker = new TachlessTracker({
        inputRateHz: sampleRateHz,
        rangeRpm: this.asset.speed.rangeRpm,
        minConfidence: this.asset.speed.minConfidence,
        fft: this.fft,
      });
    }
    for (const p of this.tracker.push(samples, t0S)) {
      if (p.rpm !== null) this.track.add(p);
      this.evidenceS = Math.max(this.evidenceS, p.tS);
    }
  }

  /** Forget the speed sensor's history (after a gap); the tracker is rebuilt on the next block. */
  resetSpeedSensor(): void {
    this.tracker = null;
  }

  /**
   * How far decisions may go, given the time every bound channel has reached (`sampleS`).
   * Wait until the speed source has spoken for the decision time, so a decision never rests on
   * a speed point that is merely late: a tach point comes once its revolution has been confirmed
   * by the next pulse, a tachless speed at the centre of its frame (half a frame, two hops and
   * the decimator's delay behind the data), a speed topic up to max_age_s late. Wait that long at
   * most, then decide with what there is (which may be "unknown").
   */
  watermarkS(sampleS: number): number {
    if (!Number.isFinite(sampleS) || this.series) return sampleS;
    const waitS = this.tracker ? this.tracker.lagS : this.asset.speed.maxAgeS;
    return Math.min(sampleS, Math.max(this.evidenceS, sampleS - waitS));
  }
}
