/**
 * Why an input message on a sample or speed topic was not used. These strings are counter
 * names and log fields (short snake_case, pinned: add, never rename); docs/payloads.md says
 * what each means and what the agent does. The sequencer's own outcomes (duplicate, late, gap
 * and the other resets) are in blockSequencer.ts: they concern blocks that decoded well.
 */
import { printable } from '../text/printable.ts';

export const DROP_REASONS = [
  /** Neither binary ("qb" first) nor JSON ('{' first after whitespace); also an empty payload. */
  'unknown_format',
  /** Starts like JSON but is not valid UTF-8 JSON. */
  'bad_json',
  /** A JSON field has the wrong type: text or null where a number belongs, samples not a list. */
  'bad_type',
  /** A required JSON key is absent. */
  'missing_field',
  /** A JSON key qband does not know: refused rather than ignored (docs/payloads.md, "Extra keys"). */
  'unknown_key',
  /** Binary block of a version other than 1. */
  'unsupported_version',
  /** Binary header with kind other than 1 or a reserved word other than 0. */
  'bad_header',
  /** Binary length other than 32 + 4 * count bytes (including shorter than the header). */
  'bad_length',
  /** A block with no samples. */
  'empty_block',
  /** More samples than the agent's per-block limit, or a payload too large to parse. */
  'oversize',
  /** NaN or +-Infinity in t, fs, seq, rpm or any sample (also a number beyond float32 range). */
  'non_finite',
  /** A finite number out of its domain: fs outside 1..1000000 Hz, seq negative, fractional or beyond 2^53 - 1. */
  'bad_value',
  /** Speed record with rpm < 0 or above twice the top of the asset's speed range. */
  'speed_out_of_range',
  /** A finite sample beyond +-1e6, the bound recordings have too (recordingLimits.ts): corrupt data. */
  'sample_out_of_range',
] as const;

export type DropReason = (typeof DROP_REASONS)[number];

/** Result of a decoder that refused its input; `detail` quotes the offending value. */
export interface Dropped {
  ok: false;
  reason: DropReason;
  detail: string;
}

export function dropped(reason: DropReason, detail: string): Dropped {
  return { ok: false, reason, detail };
}

/**
 * A value quoted in a detail, cut short so that a hostile payload cannot flood the log, with
 * control and bidirectional characters escaped (printable) so it cannot garble a terminal.
 */
export function quote(value: unknown): string {
  let text: string;
  if (typeof value === 'number') text = Number.isNaN(value) ? 'NaN' : String(value);
  else if (value === undefined) text = 'undefined';
  else {
    try {
      text = JSON.stringify(value) ?? String(value);
    } catch {
      text = String(value);
    }
  }
  return printable(text, 40);
}
