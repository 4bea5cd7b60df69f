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
 * frames.
 */

/** A quiet frame's comb must keep this share of the reference comb. */
const QUIET_COMB_SHARE = 0.95;
/** Most frames in a row read without a search. */
const QUIET_MAX_HOPS = 25;

export class QuietSlope {
  /** Comb of the search that opened the spell; 0 when none is open. */
  private referenceComb = 0;
  private hops = 0;

  /** Whether this frame may be read at the predicted slope alone. */
  open(): boolean {
    return this.referenceComb > 0 && this.hops < QUIET_MAX_HOPS;
  }

  /** Whether a quiet frame's reading stands (else the frame is searched in full). */
  accept(comb: number, onTrack: boolean): boolean {
    if (!onTrack || !(comb >= QUIET_COMB_SHARE * this.referenceComb)) return false;
    this.hops++;
    return true;
  }

  /** After a full search: `agrees` when its best slope was within half a step of the prediction. */
  searched(agrees: boolean, comb: number): void {
    this.referenceComb = agrees && comb > 0 ? comb : 0;
    this.hops = 0;
  }

  /** No track, or the track was dropped. */
  close(): void {
    this.referenceComb = 0;
    this.hops = 0;
  }
}
