/**
 * Separation margin between a resonance crossing speed and the operating speed range.
 *
 * Required margin from the amplification factor AF (AF = Q for a half-power estimate), by the
 * rule API 684 / API 617 write for rotor critical speeds (SEPARATION_MARGIN_BASIS says how far
 * that carries here):
 *   AF < 2.5                        no margin required (the mode is heavily damped)
 *   crossing below the range        SM = min(16, 17 (1 - 1/(AF - 1.5)))        percent of min speed
 *   crossing above the range        SM = min(26, 10 + 17 (1 - 1/(AF - 1.5)))   percent of max speed
 * The caps bind from AF = 18.5 on.
 */

/**
 * The one wording of where the required margin comes from: README, `qband check` (help, report
 * and JSON), docs/asset-map.md and the tests say exactly this (test/separationWording.test.ts).
 */
export const SEPARATION_MARGIN_BASIS =
  'The required separation margin follows the API 684 rule from the amplification factor (formula recalled from memory); that rule is written for rotor critical speeds and serves here as a screening figure for structural resonances.';

export type CrossingPosition = 'below' | 'inside' | 'above';

/** AF below which no separation is required. */
export const AF_NO_MARGIN = 2.5;
/** Largest margin ever required below and above the operating range, percent. */
export const MAX_MARGIN_BELOW_PCT = 16;
export const MAX_MARGIN_ABOVE_PCT = 26;

export function requiredSeparationMarginPct(af: number, position: 'below' | 'above'): number {
  if (af < AF_NO_MARGIN) return 0;
  const base = 17 * (1 - 1 / (af - 1.5));
  return position === 'below' ? Math.min(MAX_MARGIN_BELOW_PCT, base) : Math.min(MAX_MARGIN_ABOVE_PCT, 10 + base);
}

export interface ActualMargin {
  position: CrossingPosition;
  /**
   * Below min: (min - Nc)/min * 100; above max: (Nc - max)/max * 100. Inside the range it is
   * negative: minus the distance to the nearer edge, in percent of that edge.
   */
  marginPct: number;
}

export function actualSeparationMargin(crossingRpm: number, rangeRpm: readonly [number, number]): ActualMargin {
  const [minRpm, maxRpm] = rangeRpm;
  if (crossingRpm < minRpm) return { position: 'below', marginPct: ((minRpm - crossingRpm) / minRpm) * 100 };
  if (crossingRpm > maxRpm) return { position: 'above', marginPct: ((crossingRpm - maxRpm) / maxRpm) * 100 };
  const fromMinPct = ((crossingRpm - minRpm) / minRpm) * 100;
  const fromMaxPct = ((maxRpm - crossingRpm) / maxRpm) * 100;
  return { position: 'inside', marginPct: -Math.min(fromMinPct, fromMaxPct) };
}
