/**
 * The speed of a profiled run as a function of time: piecewise linear in rpm between the
 * breakpoints of its holds and ramps, and its exact integral (shaft revolutions).
 *
 * Within one segment rpm(t) = r_a + (r_b - r_a)(t - t_a)/(t_b - t_a), so the revolutions since
 * t_a are (t - t_a)(r_a + rpm(t)) / 2 / 60: the trapezoid is exact for a straight line. Summing
 * whole segments before it gives the phase at any time without accumulating rounding.
 */
import type { Profile } from './profile.ts';

export interface SpeedSchedule {
  /** Breakpoint times (s), starting at 0. */
  timesS: Float64Array;
  /** Speed at each breakpoint (rpm). */
  rpm: Float64Array;
  /** Revolutions completed at each breakpoint. */
  revs: Float64Array;
  durationS: number;
  /** Highest speed of the run (rpm). */
  topRpm: number;
}

export function speedSchedule(profile: Pick<Profile, 'startRpm' | 'segments'>): SpeedSchedule {
  const n = profile.segments.length + 1;
  const timesS = new Float64Array(n);
  const rpm = new Float64Array(n);
  const revs = new Float64Array(n);
  rpm[0] = profile.startRpm;
  profile.segments.forEach((seg, i) => {
    timesS[i + 1] = timesS[i] + seg.durationS;
    rpm[i + 1] = seg.kind === 'ramp' ? seg.toRpm : rpm[i];
    revs[i + 1] = revs[i] + (seg.durationS * (rpm[i] + rpm[i + 1])) / 2 / 60;
  });
  return { timesS, rpm, revs, durationS: timesS[n - 1], topRpm: Math.max(...rpm) };
}

/** Index of the segment holding `tS` (clamped to the first and last). */
export function segmentIndex(s: SpeedSchedule, tS: number, hint = 0): number {
  const last = s.timesS.length - 2;
  let i = Math.max(0, Math.min(hint, last));
  while (i > 0 && tS < s.timesS[i]) i--;
  while (i < last && tS >= s.timesS[i + 1]) i++;
  return i;
}

/** Speed at `tS` (rpm); held at the end values outside the run. */
export function rpmAt(s: SpeedSchedule, tS: number, segment = segmentIndex(s, tS)): number {
  if (s.timesS.length === 1) return s.rpm[0];
  const t0 = s.timesS[segment];
  const t1 = s.timesS[segment + 1];
  const u = Math.min(1, Math.max(0, (tS - t0) / (t1 - t0)));
  return s.rpm[segment] + (s.rpm[segment + 1] - s.rpm[segment]) * u;
}

/** Shaft revolutions completed from t = 0 to `tS` (clamped to the run). */
export function revolutionsAt(s: SpeedSchedule, tS: number, segment = segmentIndex(s, tS)): number {
  if (s.timesS.length === 1) return 0;
  const t = Math.min(Math.max(tS, 0), s.durationS);
  const dt = t - s.timesS[segment];
  return s.revs[segment] + (dt * (s.rpm[segment] + rpmAt(s, t, segment))) / 2 / 60;
}
