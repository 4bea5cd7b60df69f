/**
 * Skip bands: the shaft speeds a variable-speed drive should not dwell in, from the crossings'
 * speed bands.
 *
 * Each crossing whose widened speed band reaches into the operating range gives one band:
 *   [lo - Nc m / 100, hi + Nc m / 100]
 * with [lo, hi] the crossing's speed band (the order inside the half-power band), Nc the
 * crossing speed and m the skip margin in percent. The alarm's deadband is a percentage of fn,
 * which on the speed axis is the same percentage of Nc, so m = deadband + speed uncertainty
 * keeps the drive out of everything the alarm would still count as in the band. Bands that
 * overlap or touch are merged into one.
 */

export interface SkipSource {
  orderId: string;
  componentId: string;
  crossingRpm: number;
  speedBandRpm: readonly [number, number];
}

export interface SkipBand {
  loRpm: number;
  hiRpm: number;
  /** The crossings it covers, as `order x component`. */
  crossings: string[];
}

export function widenedBand(source: SkipSource, marginPct: number): [number, number] {
  const widen = (source.crossingRpm * marginPct) / 100;
  return [source.speedBandRpm[0] - widen, source.speedBandRpm[1] + widen];
}

/** Skip bands in ascending speed, merged where they overlap or touch. */
export function skipBands(sources: readonly SkipSource[], marginPct: number, rangeRpm: readonly [number, number]): SkipBand[] {
  const bands = sources
    .map((s) => ({ band: widenedBand(s, marginPct), name: `${s.orderId} x ${s.componentId}` }))
    .filter(({ band }) => band[1] >= rangeRpm[0] && band[0] <= rangeRpm[1])
    .sort((a, b) => a.band[0] - b.band[0]);
  const out: SkipBand[] = [];
  for (const { band, name } of bands) {
    const last = out.at(-1);
    if (last && band[0] <= last.hiRpm) {
      last.hiRpm = Math.max(last.hiRpm, band[1]);
      last.crossings.push(name);
    } else out.push({ loRpm: band[0], hiRpm: band[1], crossings: [name] });
  }
  return out;
}

/** Share of the operating range outside every skip band, percent. */
export function usableRangePct(bands: readonly SkipBand[], rangeRpm: readonly [number, number]): number {
  const [min, max] = rangeRpm;
  let skipped = 0;
  for (const b of bands) skipped += Math.max(0, Math.min(b.hiRpm, max) - Math.max(b.loRpm, min));
  return ((max - min - skipped) / (max - min)) * 100;
}

/**
 * Drive output frequency per shaft rpm of an induction motor: synchronous speed is
 * 120 f / poles rpm and the shaft turns (1 - slip) of it, so f = rpm * poles / (120 (1 - slip)).
 */
export function motorHzPerRpm(poles: number, slipPct: number): number {
  return poles / (120 * (1 - slipPct / 100));
}
