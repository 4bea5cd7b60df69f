/**
 * The tachless tracker's recent estimates and the prediction they make: a least-squares line
 * through the trusted estimates of the last PREDICT_WINDOW_S before a frame's centre gives the
 * speed and relative slope there (tachlessTracker.ts, step 3). Where the window holds fewer than
 * PREDICT_MIN_POINTS because frames were skipped (a quiet spell resting, quietSlope.ts), it
 * reaches SKIP_REACH_HOPS hops further back, as many estimates as when every frame was read.
 */

/** Trusted estimates within this much data time before a frame's centre predict it (s). */
const PREDICT_WINDOW_S = 1.0;
/** Fewest trusted estimates that make a prediction. */
const PREDICT_MIN_POINTS = 3;
/** How much further (hops) the window reaches while a skipped frame lies within it. */
const SKIP_REACH_HOPS = 1.5;

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
  private readonly hopS: number;
  /** Clock time of the last skipped frame (-Infinity: none since the last clear). */
  private skippedS = Number.NEGATIVE_INFINITY;

  /** `hopS`: the tracker's hop (s); the newest trusted estimate must lie within 2.5 hops. */
  constructor(minConfidence: number, hopS: number) {
    this.minConfidence = minConfidence;
    this.hopS = hopS;
    this.maxGapS = 2.5 * hopS;
  }

  clear(): void {
    this.estimates.length = 0;
    this.skippedS = Number.NEGATIVE_INFINITY;
  }

  /** A frame centred at `clockS` was skipped (no estimate for it). */
  skipped(clockS: number): void {
    this.skippedS = clockS;
  }

  /** Speed and relative slope (before any clamp) at `tS` (tracker clock) from the trusted estimates just before it, or null. */
  predict(tS: number): { hz: number; beta: number } | null {
    const pts = this.points;
    this.collect(tS, PREDICT_WINDOW_S);
    const reachS = SKIP_REACH_HOPS * this.hopS;
    if (pts.length < PREDICT_MIN_POINTS && tS - this.skippedS < PREDICT_WINDOW_S + reachS) this.collect(tS, PREDICT_WINDOW_S + reachS);
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

  /** The trusted estimates of the `windowS` before `tS` into `points`. */
  private collect(tS: number, windowS: number): void {
    const pts = this.points;
    pts.length = 0;
    for (let i = 0; i < this.estimates.length; i++) {
      const e = this.estimates[i];
      if (e.clockS < tS && e.clockS >= tS - windowS && e.confidence >= this.minConfidence) pts.push(e);
    }
  }

  /** Adds an estimate, in time order (a skipped frame read after all comes after a newer one). */
  remember(e: TrackEstimate): void {
    let i = this.estimates.length;
    while (i > 0 && this.estimates[i - 1].clockS > e.clockS) i--;
    if (i === this.estimates.length) this.estimates.push(e);
    else this.estimates.splice(i, 0, e);
    const keepFromS = e.clockS - PREDICT_WINDOW_S - 1;
    let drop = 0;
    while (drop < this.estimates.length && this.estimates[drop].clockS < keepFromS) drop++;
    if (drop > 0) this.estimates.splice(0, drop);
  }
}
