/**
 * What a sample rate leaves out of an asset's map, said before a run so that silence is not
 * taken for good news: components whose natural frequency is at or above half the rate (order
 * amplitudes near them cannot be measured; dwell decisions still follow the speed) and a
 * severity band with nothing left in it.
 */
import type { AssetConfig } from '../config/types.ts';
import { SEVERITY_BAND_HZ } from '../manipulation/velocitySeverity.ts';

export function rateCoverageWarnings(asset: AssetConfig, sampleRateHz: number): string[] {
  const nyquistHz = sampleRateHz / 2;
  const out: string[] = [];
  const above = asset.components.filter((c) => c.fnHz >= nyquistHz);
  if (above.length > 0 && above.length === asset.components.length) {
    out.push(
      `every component's fn (${above.map((c) => `${c.id} ${c.fnHz} Hz`).join(', ')}) is at or above half the sample rate (${nyquistHz} Hz): no order amplitude near a resonance can be measured in this recording (dwell decisions still follow the speed)`,
    );
  } else if (above.length > 0) {
    out.push(
      `fn of ${above.map((c) => `${c.id} (${c.fnHz} Hz)`).join(', ')} is at or above half the sample rate (${nyquistHz} Hz): order amplitudes near ${above.length === 1 ? 'it' : 'them'} cannot be measured in this recording`,
    );
  }
  if (nyquistHz <= SEVERITY_BAND_HZ[0]) {
    out.push(`half the sample rate (${nyquistHz} Hz) is below the severity band (${SEVERITY_BAND_HZ[0]}-${SEVERITY_BAND_HZ[1]} Hz): no severity can be measured`);
  }
  return out;
}
