/**
 * The identification record: a component's fn and Q measured from the machine's own sweeps,
 * beside the map's, with bounds, fit quality and, where the difference matters, a drift
 * advisory. Pinned fields: kind, asset, component, order, fn_hz, q, zeta, map_fn_hz, map_q.
 */
export interface DecayEstimate {
  /** Q and zeta from the logarithmic decrement of free decays; fn from their ringing frequency. */
  q: number;
  zeta: number;
  fn_hz: number;
  /** Spread (+-2 standard errors of the mean over decays, or of the one decay's fit). */
  q_bounds: [number, number];
  decays: number;
  /** Cycles of ringing fitted, summed over decays. */
  cycles: number;
}

export interface DriftAdvisory {
  /** What differs: fn beyond the tolerance, Q beyond the tolerance, or both. */
  fn_shift_pct: number;
  q_ratio: number;
  message: string;
  /** The map's line for this component as it is, and as the measurement would have it. */
  yaml_now: string | null;
  yaml_measured: string;
  line: number | null;
  /** What the measured band does to each crossing of the operating range. */
  crossings: Array<{ order: string; speed_band_rpm_map: [number, number]; speed_band_rpm_measured: [number, number]; effect: string }>;
}

export interface IdentifiedRecord {
  kind: 'identified';
  asset: string;
  component: string;
  order: string;
  sensor: string;
  fn_hz: number;
  q: number;
  zeta: number;
  /** +-2 standard deviations. */
  fn_bounds_hz: [number, number];
  q_bounds: [number, number];
  map_fn_hz: number;
  map_q: number;
  /** Measured velocity half-power band, Hz (fn (sqrt(1 + zeta^2) -/+ zeta)). */
  band_hz: [number, number];
  map_band_hz: [number, number];
  /**
   * 'amplitude and phase' (sweep fit with a once-per-rev tach), 'amplitude' (sweep fit without),
   * or 'free decay' (the sweep could not be fitted; fn and Q from free decays alone).
   */
  method: 'amplitude and phase' | 'amplitude' | 'free decay';
  fit_r2: number;
  /** How much better the resonance explains the curve than a smooth one (residual ratio); null from free decays alone. */
  resonance_gain: number | null;
  /** Estimated exponent of the forcing's growth with speed (2 for unbalance); null from free decays alone. */
  force_exponent: number | null;
  transients: Array<{ t_start_s: number; t_end_s: number; direction: 'up' | 'down'; points: number }>;
  decay: DecayEstimate | null;
  drift: DriftAdvisory | null;
  advice: string;
}
