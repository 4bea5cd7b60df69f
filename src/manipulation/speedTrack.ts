/**
 * The shaft speed at a given data time, or an honest "unknown".
 *
 * Points from any source are kept sorted by time in a bounded buffer (they may arrive out of
 * order: spectral estimates lag the tach, files are merged). `at(t)` answers from the points
 * around t:
 *   - no earlier point                      -> unknown, 'no-data'
 *   - earlier point older than maxAgeS      -> unknown, 'stale'
 *   - earlier point below minConfidence     -> unknown, 'low-confidence'
 *   - a trusted later point within maxAgeS  -> linear interpolation between the two
 *   - otherwise                             -> the earlier point held (zero-order hold)
 * We never extrapolate and never answer from a point we do not trust: a wrong speed puts an
 * order in the wrong place relative to a resonance band, which is worse than no answer.
 */
import type { SpeedPoint } from './speedPoint.ts';

export interface SpeedAt {
  rpm: number | null;
  /** Confidence of the answer (the lower of the two points when interpolating); 0 when no data. */
  confidence: number;
  /** Data time since the earlier point the answer rests on (s); null when there is none. */
  ageS: number | null;
  source: SpeedPoint['source'] | null;
  reason: 'ok' | 'no-data' | 'stale' | 'low-confidence';
}

export interface SpeedTrackOptions {
  /** A point older than this (s of data time) no longer says anything about the speed. */
  maxAgeS: number;
  /** Points below this confidence (0..1) count as unknown. */
  minConfidence: number;
  /** Most points kept; the oldest go first. Default 4096. */
  capacity?: number;
}

const DEFAULT_CAPACITY = 4096;

export class SpeedTrack {
  private readonly maxAgeS: number;
  private readonly minConfidence: number;
  private readonly capacity: number;
  /** Sorted by tS ascending; equal times keep the last one added. */
  private points: SpeedPoint[] = [];
  private droppedCount = 0;

  constructor(opts: SpeedTrackOptions) {
    if (!(opts.maxAgeS >= 0)) throw new RangeError(`SpeedTrack: maxAgeS must be >= 0, got ${opts.maxAgeS}`);
    if (!(opts.minConfidence >= 0 && opts.minConfidence <= 1)) {
      throw new RangeError(`SpeedTrack: minConfidence must be in 0..1, got ${opts.minConfidence}`);
    }
    const capacity = opts.capacity ?? DEFAULT_CAPACITY;
    if (!Number.isInteger(capacity) || capacity < 2) {
      throw new RangeError(`SpeedTrack: capacity must be an integer >= 2, got ${capacity}`);
    }
    this.maxAgeS = opts.maxAgeS;
    this.minConfidence = opts.minConfidence;
    this.capacity = capacity;
  }

  /** Points refused because a field was not finite, rpm < 0 or confidence outside 0..1. */
  get dropped(): number {
    return this.droppedCount;
  }

  get size(): number {
    return this.points.length;
  }

  add(p: SpeedPoint): void {
    if (!Number.isFinite(p.tS) || !Number.isFinite(p.rpm) || p.rpm < 0 || !(p.confidence >= 0 && p.confidence <= 1)) {
      this.droppedCount++;
      return;
    }
    const pts = this.points;
    const i = this.upperBound(p.tS); // first index with tS > p.tS
    if (i > 0 && pts[i - 1].tS === p.tS) {
      pts[i - 1] = { ...p };
      return;
    }
    if (pts.length >= this.capacity) {
      // Full: the oldest point goes. A newcomer older than everything kept is itself the oldest.
      if (i === 0) return;
      pts.splice(i, 0, { ...p });
      pts.shift();
      return;
    }
    pts.splice(i, 0, { ...p });
  }

  at(tS: number): SpeedAt {
    const pts = this.points;
    const i = this.upperBound(tS);
    if (i === 0 || !Number.isFinite(tS)) {
      return { rpm: null, confidence: 0, ageS: null, source: null, reason: 'no-data' };
    }
    const prev = pts[i - 1];
    const ageS = tS - prev.tS;
    if (ageS > this.maxAgeS) {
      return { rpm: null, confidence: prev.confidence, ageS, source: prev.source, reason: 'stale' };
    }
    if (prev.confidence < this.minConfidence) {
      return { rpm: null, confidence: prev.confidence, ageS, source: prev.source, reason: 'low-confidence' };
    }
    const next = i < pts.length ? pts[i] : undefined;
    if (next !== undefined && next.tS - tS <= this.maxAgeS && next.confidence >= this.minConfidence) {
      const w = (tS - prev.tS) / (next.tS - prev.tS);
      return {
        rpm: prev.rpm + w * (next.rpm - prev.rpm),
        confidence: Math.min(prev.confidence, next.confidence),
        ageS,
        source: w <= 0.5 ? prev.source : next.source,
        reason: 'ok',
      };
    }
    return { rpm: prev.rpm, confidence: prev.confidence, ageS, source: prev.source, reason: 'ok' };
  }

  latestS(): number | null {
    return this.points.length === 0 ? null : this.points[this.points.length - 1].tS;
  }

  reset(): void {
    this.points = [];
    this.droppedCount = 0;
  }

  /** Index of the first point with tS > t (binary search). */
  private upperBound(t: number): number {
    let lo = 0;
    let hi = this.points.length;
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (this.points[mid].tS <= t) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  }
}
