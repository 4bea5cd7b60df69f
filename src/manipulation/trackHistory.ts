/**
 * The tachless tracker's recent estimates and the prediction they make: a least-squares line
 * through the trusted estimates of the last PREDICT_WINDOW_S before a frame's centre gives the
 * speed and relative slope there (tachlessTracker.ts, step 3).
 */

/** Trusted estimates within this much data time before a frame's centre predict it (s). */
const PREDICT_WINDOW_S = 1.0;
/** Fewest trusted estimates that make a prediction. */
const PREDICT_MIN_POINTS = 3;

export interface TrackEstimate {
  /** Time of the frame's centre on the tracker's own sample clock (s since the last reset). */
  clockS: number;
  hz: number;
  confidence: number;
}

export class TrackHistory {
  private readonly estimates: TrackEstimate[] = [];
  /** Scratch of predict(): the estimates that make the prediction. */
  private readonly points: TrackEstimate[] = [];
  private readonly minConfidence: number;
  /** The newest trusted estimate must be at most this far before the centre (s). */
  private readonly maxGapS: number;

  constructor(minConfidence: number, maxGapS: number) {
    this.minConfidence = minConfidence;
    this.maxGapS = maxGapS;
  }

  clear(): void {
    this.estimates.length = 0;
  }

  /** Speed and relative slope (before any clamp) at `tS` (tracker clock) from the trusted estimates just before it, or null. */
  predict(tS: number): { hz: number; beta: number } | null {
    const pts = this.points;
    pts.length = 0;
    for (let i = 0; i < this.estimates.length; i++) {
      const e = this.estimates[i];
      if (e.clockS < tS && e.clockS >= tS - PREDICT_WINDOW_S && e.confidence >= this.minConfidence) pts.push(e);
    }
    if (pts.length < PREDICT_MIN_POINTS) return null;
    if (tS - pts[pts.length - 1].clockS > this.maxGapS) return null;
    let st = 0;
    let sf = 0;
    for (let i = 0; i < pts.length; i++) {
      st += pts[i].clockS - tS;
      sf += pts[i].hz;
    }
    const n = pts.length;
    const mt = st / n;
    const mf = sf / n;
    let num = 0;
    let den = 0;
    for (let i = 0; i < pts.length; i++) {
      const p = pts[i];
      num += (p.clockS - tS - mt) * (p.hz - mf);
      den += (p.clockS - tS - mt) ** 2;
    }
    const slope = den > 0 ? num / den : 0;
    const hz = mf - slope * mt;
    if (!(hz > 0)) return null;
    return { hz, beta: slope / hz };
  }

  remember(e: TrackEstimate): void {
    this.estimates.push(e);
    const keepFromS = e.clockS - PREDICT_WINDOW_S - 1;
    let drop = 0;
    while (drop < this.estimates.length && this.estimates[drop].clockS < keepFromS) drop++;
    if (drop > 0) this.estimates.splice(0, drop);
  }
}
