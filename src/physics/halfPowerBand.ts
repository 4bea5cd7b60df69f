/**
 * Half-power bands of a single mode, and the conversions between Q, zeta and a band.
 *
 * qband's band is the velocity (mobility) half-power band. The mobility of an SDOF mode,
 * |V| = w / sqrt((w0^2 - w^2)^2 + (2 zeta w0 w)^2), peaks exactly at w0 with 1/(2 zeta w0).
 * |V|^2 is half its peak where w0^2 - w^2 = -/+ 2 zeta w0 w, i.e.
 *   f = fn (sqrt(1 + zeta^2) -/+ zeta)
 * so the band is exactly fn/Q wide (Q = 1/(2 zeta)) and its geometric centre sqrt(lo hi) is fn.
 * The displacement half-power points differ (see displacementHalfPowerBand); fn (1 -/+ zeta) is
 * only a first-order approximation of either.
 */

/** Q = 1/(2 zeta): the velocity half-power bandwidth is fn/Q and the dynamic amplification at fn is Q. */
export function qFromZeta(zeta: number): number {
  return 1 / (2 * zeta);
}

export function zetaFromQ(q: number): number {
  return 1 / (2 * q);
}

/**
 * Q from a measured half-power band: fn / (hi - lo). When fn is not given the band's geometric
 * centre sqrt(lo hi) is used, which is fn for an exact velocity half-power band.
 */
export function qFromBand(loHz: number, hiHz: number, fnHz: number = Math.sqrt(loHz * hiHz)): number {
  return fnHz / (hiHz - loHz);
}

/** Exact velocity half-power points [lo, hi] in Hz: fn (sqrt(1 + zeta^2) -/+ zeta), zeta = 1/(2Q). */
export function velocityHalfPowerBand(fnHz: number, q: number): [number, number] {
  const zeta = zetaFromQ(q);
  const root = Math.sqrt(1 + zeta * zeta);
  return [fnHz * (root - zeta), fnHz * (root + zeta)];
}

/**
 * Exact displacement half-power points [lo, hi] in Hz, for reports.
 *
 * The displacement peak sits at fn sqrt(1 - 2 zeta^2) (exists for zeta < 1/sqrt(2)); its square
 * halves where (f/fn)^2 = 1 - 2 zeta^2 -/+ 2 zeta sqrt(1 - zeta^2). When the lower root is not
 * positive the response at low frequency never falls to half power: lo is null (the band is
 * open at 0 Hz). Returns null when there is no resonant peak at all (zeta >= 1/sqrt(2)).
 */
export function displacementHalfPowerBand(fnHz: number, zeta: number): [number | null, number] | null {
  if (!(zeta < Math.SQRT1_2)) return null;
  const centre = 1 - 2 * zeta * zeta;
  const spread = 2 * zeta * Math.sqrt(1 - zeta * zeta);
  const loSquared = centre - spread;
  const hi = fnHz * Math.sqrt(centre + spread);
  return [loSquared > 0 ? fnHz * Math.sqrt(loSquared) : null, hi];
}
