/**
 * Zoom by decimation: the largest power-of-two decimation that still keeps every frequency the
 * asset needs below the usable top of the decimated spectrum.
 *
 * Needed: the broadband severity band up to 1000 Hz and every order at the top of the operating
 * speed range, with 10 % headroom. "Usable top" is the analysis rate / 2.56, the customary
 * ratio of sample rate to the highest analysed line, which leaves the anti-alias filter's
 * transition band unused (common practice). Decimating instead of growing the FFT keeps a
 * fine line spacing (rate / frame size) at a fixed frame size.
 */
import type { AssetConfig } from '../config/types.ts';

const SEVERITY_TOP_HZ = 1000;
const RATE_TO_USABLE = 2.56;
const ORDER_HEADROOM = 1.1;

export function chooseDecimation(inputRateHz: number, asset: AssetConfig): number {
  const topShaftHz = asset.speed.rangeRpm[1] / 60;
  let neededHz = SEVERITY_TOP_HZ;
  for (const o of asset.orders) neededHz = Math.max(neededHz, o.multiple * topShaftHz * ORDER_HEADROOM);
  let factor = 1;
  while ((inputRateHz / (factor * 2)) / RATE_TO_USABLE >= neededHz) factor *= 2;
  return factor;
}
