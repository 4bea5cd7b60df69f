/**
 * Broadband vibration severity: RMS velocity over 10 to 1000 Hz and its evaluation zone.
 *
 * 10-1000 Hz is the measurement band ISO 20816-1 (formerly ISO 10816-1) sets for machines running
 * above 600 rpm. The RMS comes from the velocity spectrum the engine already has (see
 * spectrumMath.accelerationToVelocityMmS), summed over the band's lines with the Hann window's
 * noise bandwidth divided out (spectrumMath.bandRms).
 *
 * Zones: A (newly commissioned), B (unrestricted long-term operation), C (restricted), D (damage
 * possible). Reaching a boundary enters the higher zone. The default boundaries are a fallback
 * only; a site's map gives its own in `severity.zone_boundaries_mm_s`.
 */
import { QbandError } from '../errors.ts';
import { hannWindow } from './hannWindow.ts';
import { bandRms } from './spectrumMath.ts';

export type SeverityZone = 'A' | 'B' | 'C' | 'D';

/** Measurement band for machines above 600 rpm (ISO 20816-1). */
export const SEVERITY_BAND_HZ: readonly [number, number] = [10, 1000];

/** Boundaries A/B, B/C, C/D in mm/s RMS; see DEFAULT_ZONE_BASIS. */
export const DEFAULT_ZONE_BOUNDARIES_MM_S: readonly [number, number, number] = [1.4, 2.8, 4.5];

/**
 * Shown beside every zone computed on the default boundaries (state, replay, demo). ISO 10816-3
 * is now ISO 20816-3:2022; the figures are the ones remembered from the older part and are not
 * checked against either text.
 */
export const DEFAULT_ZONE_BASIS =
  'qband default: ISO 10816-3 (now ISO 20816-3:2022) group 2 (medium machines 15-300 kW), rigid foundation, ' +
  'A/B 1.4, B/C 2.8, C/D 4.5 mm/s RMS; recalled from memory, not checked against the standard: replace with the site’s own values';

const enbwBySize = new Map<number, number>();

/** ENBW in bins of the periodic Hann window behind a spectrum of `lines` lines (frame of 2 (lines - 1) points). */
function hannEnbwForLines(lines: number): number {
  let enbw = enbwBySize.get(lines);
  if (enbw === undefined) {
    enbw = hannWindow(2 * (lines - 1)).enbwBins;
    enbwBySize.set(lines, enbw);
  }
  return enbw;
}

/**
 * RMS velocity in mm/s over [loHz, hiHz] (edges included) of a velocity RMS amplitude spectrum
 * in mm/s made with a periodic Hann window. Lines beyond the spectrum's end are simply absent:
 * the caller should report a band clipped by the sample rate.
 */
export function broadbandVelocityRmsMmS(
  velocityMmS: Float64Array,
  binHz: number,
  loHz: number = SEVERITY_BAND_HZ[0],
  hiHz: number = SEVERITY_BAND_HZ[1],
  enbwBins: number = hannEnbwForLines(velocityMmS.length),
): number {
  return bandRms(velocityMmS, binHz, loHz, hiHz, enbwBins);
}

/** Zone of a velocity RMS: below boundaries[0] is A, below [1] B, below [2] C, else D. */
export function zoneOf(rmsMmS: number, boundaries: readonly [number, number, number]): SeverityZone {
  const [ab, bc, cd] = boundaries;
  if (!(ab > 0 && bc > ab && cd > bc && Number.isFinite(cd))) {
    throw new QbandError(
      'QB_E_DSP_ARGUMENT',
      `zone boundaries must be finite, positive and increasing, got [${boundaries.join(', ')}] mm/s`,
    );
  }
  if (!(rmsMmS >= 0) || !Number.isFinite(rmsMmS)) {
    throw new QbandError('QB_E_DSP_ARGUMENT', `velocity RMS must be a finite number >= 0 mm/s, got ${rmsMmS}`);
  }
  if (rmsMmS < ab) return 'A';
  if (rmsMmS < bc) return 'B';
  if (rmsMmS < cd) return 'C';
  return 'D';
}
