/**
 * Single-degree-of-freedom forced response: m x'' + c x' + k x = F0 sin(w t).
 *
 * Every amplitude here is per unit force per unit mass (F0/m = 1), with w0 = 2 pi fn and
 * zeta = c / (2 m w0). The steady state is x(t) = X sin(w t - phi) with
 *   X   = 1 / sqrt((w0^2 - w^2)^2 + (2 zeta w0 w)^2)
 *   phi = atan2(2 zeta w0 w, w0^2 - w^2)        (0 below fn, 90 deg at fn, 180 deg above)
 * Velocity and acceleration amplitudes are w X and w^2 X.
 */

const TWO_PI = 2 * Math.PI;

/** Displacement amplitude per unit F0/m (units: m per (N/kg) when f is in Hz). */
export function sdofDisplacement(fHz: number, fnHz: number, zeta: number): number {
  const w = TWO_PI * fHz;
  const w0 = TWO_PI * fnHz;
  const stiffnessTerm = w0 * w0 - w * w;
  const dampingTerm = 2 * zeta * w0 * w;
  return 1 / Math.sqrt(stiffnessTerm * stiffnessTerm + dampingTerm * dampingTerm);
}

/** Phase lag of displacement behind force, in degrees: 0 below fn, 90 at fn, 180 above. */
export function sdofPhaseDeg(fHz: number, fnHz: number, zeta: number): number {
  const w = TWO_PI * fHz;
  const w0 = TWO_PI * fnHz;
  return (Math.atan2(2 * zeta * w0 * w, w0 * w0 - w * w) * 180) / Math.PI;
}

/** Velocity (mobility) amplitude per unit F0/m: w X. Peaks exactly at fn with value 1/(2 zeta w0). */
export function sdofVelocity(fHz: number, fnHz: number, zeta: number): number {
  return TWO_PI * fHz * sdofDisplacement(fHz, fnHz, zeta);
}

/** Acceleration (accelerance) amplitude per unit F0/m: w^2 X. */
export function sdofAcceleration(fHz: number, fnHz: number, zeta: number): number {
  const w = TWO_PI * fHz;
  return w * w * sdofDisplacement(fHz, fnHz, zeta);
}

/**
 * Dynamic amplification: displacement over the static deflection F0/k, i.e. X w0^2 =
 * 1 / sqrt((1 - r^2)^2 + (2 zeta r)^2) with r = f/fn. Equals Q = 1/(2 zeta) at r = 1.
 */
export function sdofAmplification(fHz: number, fnHz: number, zeta: number): number {
  const w0 = TWO_PI * fnHz;
  return w0 * w0 * sdofDisplacement(fHz, fnHz, zeta);
}

/**
 * Cycles of free decay for the amplitude to fall by a factor e: exp(-zeta w0 t) = 1/e at
 * t = 1/(zeta w0), i.e. fd/(zeta w0) = sqrt(1 - zeta^2)/(2 pi zeta) cycles, about Q/pi
 * (the sqrt(1 - zeta^2) factor is under 0.2 % for Q >= 8).
 */
export function ringCyclesToE(q: number): number {
  return q / Math.PI;
}
