/**
 * What qband reads from a recording or a sample block at most, so that a hostile or careless
 * file cannot take an edge box's memory or time: sample rates from 1 Hz (slower says nothing
 * about vibration) to 1 MHz (beyond any accelerometer's band), at most 1024 channels, and
 * sample values within +-1e6 (in g or m/s^2 after scaling, or volts raw: no sensor reads that;
 * larger values are corrupt data whose square would overflow a spectrum's sums).
 */
import { QbandError, type ErrorCode } from '../errors.ts';

export const MIN_SAMPLE_RATE_HZ = 1;
export const MAX_SAMPLE_RATE_HZ = 1_000_000;
export const MAX_RECORDING_CHANNELS = 1024;
export const MAX_SAMPLE_ABS = 1e6;

/** True for a sample qband uses; anything else is missing data (counted, not analysed). */
export function isUsableSample(x: number): boolean {
  return x >= -MAX_SAMPLE_ABS && x <= MAX_SAMPLE_ABS;
}

/** Refuses a sample rate outside [MIN_SAMPLE_RATE_HZ, MAX_SAMPLE_RATE_HZ], naming it. */
export function checkSampleRate(rateHz: number, where: string, code: ErrorCode): void {
  if (rateHz >= MIN_SAMPLE_RATE_HZ && rateHz <= MAX_SAMPLE_RATE_HZ) return;
  throw new QbandError(
    code,
    `${where}: sample rate ${rateHz.toPrecision(6).replace(/\.?0+(e|$)/, '$1')} Hz is outside the ${MIN_SAMPLE_RATE_HZ} Hz to ${MAX_SAMPLE_RATE_HZ} Hz qband reads`,
  );
}

/** Refuses a channel count above MAX_RECORDING_CHANNELS, naming it. */
export function checkChannelCount(channels: number, where: string, code: ErrorCode): void {
  if (channels <= MAX_RECORDING_CHANNELS) return;
  throw new QbandError(code, `${where}: ${channels} channels, more than the ${MAX_RECORDING_CHANNELS} qband reads`);
}
