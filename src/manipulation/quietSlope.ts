/**
 * When the tachless tracker may skip its slope search: while the track is followed well, the
 * slope the track predicts is as good as the one a search would find, and one frame at that
 * slope replaces the five to seven of a search (tachlessTracker.ts, step 3).
 *
 * A search whose best slope lies within half a step of the prediction (the track already knew
 * the slope) opens a quiet spell, with the comb sharpness of that best frame as its reference.
 * In a quiet spell each frame is read at the predicted slope alone, and kept only when its
 * estimate is trusted, agrees with the predicted speed (the tracker's AGREE_SHARE), and its
 * comb is at least QUIET_COMB_SHARE of the reference: a ramp starting or ending smears the
 * lines (the comb drops) or moves the speed away from the prediction, and the same frame is
 * then searched in full at once. A full search also comes at least every QUIET_MAX_HOPS
 * hops.
 *
 * Resting: while a spell holds on a steady speed (a predicted slope the search could not tell
 * from none) and its last frame was kept, the next frame may be skipped altogether (no
 * estimate for it); the frame after is read again, so every second frame is read at least,
 * and any frame not kept, or a slope that grows, brings the full rate back at once (and the
 * tracker then reads the skipped frame after all).
 */

/** A quiet frame's comb must keep this share of the reference comb. */
const QUIET_COMB_SHARE = 0.95;
/** Most hops in a row (frames read or skipped) without a search. */
const QUIET_MAX_HOPS = 25;

export class QuietSlope {
  /** Comb of the search that opened the spell; 0 when none is open. */
  private referenceComb = 0;
  private hops = 0;
  /** Whether the last frame read was a quiet frame kept on a steady speed, and whether the last hop was skipped. */
  private keptLast = false;
  private restedLast = false;
  private settledLast = false;

  /** Whether this frame may be read at the predicted slope alone. */
  open(): boolean {
    return this.referenceComb > 0 && this.hops < QUIET_MAX_HOPS;
  }

  /**
   * Whether the last frame read showed no sign of movement: kept on a steady speed, or searched
   * only because the spell was due a full search and the search agreed with the prediction.
   */
  get settled(): boolean {
    return this.settledLast;
  }

  /**
   * Whether this hop's frame may be skipped: a spell holds, its last frame was kept, and the
   * hop before was not skipped. Called once a hop, before the frame is read.
   */
  rest(): boolean {
    if (this.open() && this.keptLast && !this.restedLast) {
      this.restedLast = true;
      this.hops++;
      return true;
    }
    this.restedLast = false;
    return false;
  }

  /**
   * Whether a quiet frame's reading stands (else the frame is searched in full). `steady`: the
   * predicted slope lies within half a search step of none (only then may the next frame rest).
   */
  accept(comb: number, onTrack: boolean, steady: boolean): boolean {
    const kept = onTrack && comb >= QUIET_COMB_SHARE * this.referenceComb;
    this.keptLast = kept && steady;
    this.settledLast = this.keptLast;
    if (kept) this.hops++;
    return kept;
  }

  /** After a full search: `agrees` when its best slope was within half a step of the prediction. */
  searched(agrees: boolean, comb: number): void {
    this.referenceComb = agrees && comb > 0 ? comb : 0;
    this.hops = 0;
    this.keptLast = false;
    // A search after a frame that was not kept stays a sign of movement.
    this.settledLast &&= agrees;
  }

  /** No track, or the track was dropped. */
  close(): void {
    this.referenceComb = 0;
    this.hops = 0;
    this.keptLast = false;
    this.restedLast = false;
    this.settledLast = false;
  }
}
