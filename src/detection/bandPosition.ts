/**
 * Where a forcing frequency sits relative to a component's half-power band, with the deadband
 * that keeps an alarm from chattering on the band edge.
 *
 *   inside    lo <= f <= hi                      (raising is possible)
 *   deadband  within deadbandHz outside an edge  (an active alarm holds; nothing new is raised)
 *   outside   further away than that             (clearing is possible)
 *   unknown   no trustworthy speed               (no decision at all)
 *
 * Both band edges are inclusive: an order exactly on an edge is in the band (half-power is
 * reached there).
 */
export type BandPosition = 'inside' | 'deadband' | 'outside' | 'unknown';

export function bandPosition(orderHz: number | null, bandHz: readonly [number, number], deadbandHz: number): BandPosition {
  if (orderHz === null || !Number.isFinite(orderHz)) return 'unknown';
  const [loHz, hiHz] = bandHz;
  if (orderHz >= loHz && orderHz <= hiHz) return 'inside';
  if (orderHz >= loHz - deadbandHz && orderHz <= hiHz + deadbandHz) return 'deadband';
  return 'outside';
}

/** Deadband in Hz from the map's `deadband_pct`, taken as a percentage of the natural frequency. */
export function deadbandHz(fnHz: number, deadbandPct: number): number {
  return (fnHz * deadbandPct) / 100;
}

/**
 * Separation of a frequency from a band, in percent of fn: 0 inside, positive outside.
 * Used in status records so an operator sees how close each order runs to each band.
 */
export function separationPct(orderHz: number, bandHz: readonly [number, number], fnHz: number): number {
  const [loHz, hiHz] = bandHz;
  if (orderHz < loHz) return ((loHz - orderHz) / fnHz) * 100;
  if (orderHz > hiHz) return ((orderHz - hiHz) / fnHz) * 100;
  return 0;
}
