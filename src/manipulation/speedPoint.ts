/**
 * One shaft-speed observation in data time.
 *
 * Every speed source (tach pulses, the vibration spectrum, a speed series file, a live topic)
 * produces these, and `SpeedTrack` turns a stream of them into "the speed at time t, or unknown".
 */
export interface SpeedPoint {
  /** Data time of the observation (s, same clock as the vibration samples). */
  tS: number;
  /** Shaft speed of the reference shaft (rpm). */
  rpm: number;
  /** 0..1: how much to trust this point; 1 for tach and series, the estimator's own for spectrum. */
  confidence: number;
  source: 'tach' | 'spectrum' | 'series' | 'topic';
}
