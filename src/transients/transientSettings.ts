/**
 * When a speed change counts as a transient (run-up or coast-down) and how identification
 * judges the map's bands against the measured ones. The asset map's `transients:` block sets
 * them; these are the defaults.
 */
export interface TransientSettings {
  /** A sweep must cover at least this share of the operating range's top speed (percent). */
  minSweepPct: number;
  /** ... at a mean rate of at least this share of the top speed per second (percent / s). */
  minRatePctPerS: number;
  /** Speed steady (moving less than the hysteresis) this long ends a sweep (s). */
  holdS: number;
  /** Longest sweep kept whole (s); a longer one is recorded from its last `maxSweepS`. */
  maxSweepS: number;
  /** A measured fn further than this from the map's (percent of the map's fn) is reported as drift. */
  driftFnPct: number;
  /** A measured Q outside map Q x (1 -/+ this / 100) ... (1 / (1 - this / 100)) is reported as drift. */
  driftQPct: number;
  /** Transient records kept per asset in the state directory and used for identification. */
  keep: number;
}

export const DEFAULT_TRANSIENT_SETTINGS: TransientSettings = {
  minSweepPct: 10,
  minRatePctPerS: 0.5,
  holdS: 2,
  maxSweepS: 600,
  driftFnPct: 2,
  driftQPct: 30,
  keep: 10,
};
