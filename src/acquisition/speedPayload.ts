/**
 * Speed records on a speed topic (speed.source topic): exactly {"t": <epoch s>, "rpm": <number>}.
 * Same JSON rules as the sample blocks (jsonRecord.ts): other keys are refused, not ignored.
 *
 * rpm is accepted from 0 (stopped) up to twice the top of the asset's speed range. A speed
 * below the range is information (the machine runs slow or is coasting down), so it passes;
 * a negative one or one above twice the top cannot be this machine and is `speed_out_of_range`.
 */
import { dropped, quote, type DropReason } from './dropReason.ts';
import { finiteNumber, readJsonRecord } from './jsonRecord.ts';

export type SpeedRecordDecoded = { ok: true; tS: number; rpm: number } | { ok: false; reason: DropReason; detail: string };

const KEYS = ['t', 'rpm'] as const;
/** A record is two numbers; 4 KiB leaves room for any spelling and spacing of them. */
export const MAX_SPEED_RECORD_BYTES = 4096;
/** Factor over the top of the speed range beyond which a reading cannot be this machine. */
export const SPEED_CEILING_FACTOR = 2;

/** `rangeRpm` is the asset's [min, max] operating speed range from the validated map. */
export function decodeSpeedRecord(payload: Uint8Array, rangeRpm: readonly [number, number]): SpeedRecordDecoded {
  const read = readJsonRecord(payload, KEYS, MAX_SPEED_RECORD_BYTES, `'{' (JSON speed record)`);
  if (!read.ok) return read;
  const t = finiteNumber(read.record.t, 't');
  if (!t.ok) return t;
  const rpm = finiteNumber(read.record.rpm, 'rpm');
  if (!rpm.ok) return rpm;
  const ceilingRpm = SPEED_CEILING_FACTOR * rangeRpm[1];
  if (rpm.value < 0 || rpm.value > ceilingRpm) {
    return dropped('speed_out_of_range', `rpm must be from 0 to ${ceilingRpm} (twice the range top ${rangeRpm[1]}), got ${quote(rpm.value)}`);
  }
  return { ok: true, tS: t.value, rpm: rpm.value + 0 }; // + 0 turns -0 into 0
}
