/**
 * The transient record: what one run-up or coast-down showed. It carries everything that
 * identification needs, so replay, the live agent and `qband identify` fit the same data, and
 * a record kept in the state directory can be fitted again later alongside newer ones.
 *
 * Points are arrays, one per capture step, with the columns named beside them (a sweep of a
 * minute gives about a thousand points per order).
 */
export interface OrderTrack {
  order: string;
  /** Order frequency / shaft frequency. */
  multiple: number;
  sensor: string;
  columns: ['t_s', 'speed_rpm', 'velocity_rms_mm_s', 'phase_deg'];
  /**
   * One row per step: window centre (s), mean shaft speed over the window (rpm), the order's
   * velocity RMS (mm/s) and its phase lag against the once-per-rev mark (degrees, 0..360;
   * null without a tach).
   */
  points: Array<[number, number, number, number | null]>;
}

export interface DecayTrack {
  component: string;
  sensor: string;
  /** The fixed frequency watched (the map's fn), Hz. */
  freq_hz: number;
  window_s: number;
  columns: ['t_s', 'velocity_rms_mm_s', 'phase_deg'];
  /** Velocity RMS (mm/s) and phase (degrees, against the window centre's time) at freq_hz. */
  points: Array<[number, number, number]>;
}

export interface TransientRecord {
  kind: 'transient';
  asset: string;
  direction: 'up' | 'down';
  t_start_s: number;
  t_end_s: number;
  speed_from_rpm: number;
  speed_to_rpm: number;
  /** Mean sweep rate, rpm per second (negative when coasting down). */
  rate_rpm_s: number;
  /** How the sweep ended: speed steady, direction reversed, speed lost (a trip to rest or a dropout), or data ended. */
  ended_by: 'steady' | 'reversed' | 'speed-lost' | 'end-of-data';
  speed_source: string;
  /** 'once-per-rev mark' when phases are measured against a tach, else null. */
  phase_reference: 'once-per-rev mark' | null;
  /** Length of the Hann window each point averages (s) and the step between points (s). */
  window_s: number;
  step_s: number;
  /**
   * Whether the rows resolve the narrowest band the orders cross: the largest speed step between
   * rows against the narrowest (component, order) band in speed terms. A step over a quarter of
   * that band draws the band's curve coarsely: identification is less sure there.
   */
  resolution: { speed_step_rpm: number; narrowest_band_rpm: number | null; component: string | null; order: string | null };
  orders: OrderTrack[];
  decays: DecayTrack[];
}
