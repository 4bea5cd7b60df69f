/**
 * The JSON side shared by the sample-block and speed payloads: recognise, size-check, parse,
 * and check the key set. A record must carry exactly the keys asked for: a key we do not know
 * is refused (`unknown_key`), not ignored, because a sender adding e.g. a scale or unit field
 * means something we would otherwise silently get wrong (docs/payloads.md, "Extra keys").
 */
import { dropped, quote, type Dropped } from './dropReason.ts';

/** JSON whitespace (RFC 8259 section 2): space, tab, line feed, carriage return. */
function isJsonWhitespace(byte: number): boolean {
  return byte === 0x20 || byte === 0x09 || byte === 0x0a || byte === 0x0d;
}

/** Index of the first byte that is not JSON whitespace, or -1. */
export function firstNonWhitespace(payload: Uint8Array): number {
  for (let i = 0; i < payload.length; i++) if (!isJsonWhitespace(payload[i])) return i;
  return -1;
}

export function describeStart(payload: Uint8Array): string {
  const i = firstNonWhitespace(payload);
  if (i < 0) return payload.length === 0 ? 'the payload is empty' : `the payload holds only whitespace (${payload.length} bytes)`;
  const b = payload[i];
  const shown = b >= 0x20 && b < 0x7f ? ` ('${String.fromCharCode(b)}')` : '';
  return `the first non-whitespace byte is 0x${b.toString(16).padStart(2, '0')}${shown}`;
}

const utf8 = new TextDecoder('utf-8', { fatal: true, ignoreBOM: true });

/**
 * Parse `payload` as one JSON object with exactly `keys`. `expected` names the accepted forms
 * for the unknown_format detail. Payloads above `maxBytes` are refused as oversize unparsed.
 */
export function readJsonRecord(
  payload: Uint8Array,
  keys: readonly string[],
  maxBytes: number,
  expected: string,
): { ok: true; record: Record<string, unknown> } | Dropped {
  const start = firstNonWhitespace(payload);
  if (start < 0 || payload[start] !== 0x7b) return dropped('unknown_format', `${describeStart(payload)}; expected ${expected}`);
  if (payload.length > maxBytes) {
    return dropped('oversize', `JSON payload of ${payload.length} bytes exceeds the ${maxBytes}-byte limit`);
  }
  let text: string;
  try {
    text = utf8.decode(payload);
  } catch {
    return dropped('bad_json', 'payload is not valid UTF-8');
  }
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    const why = err instanceof Error ? err.message : String(err);
    return dropped('bad_json', why.length > 80 ? `${why.slice(0, 77)}...` : why);
  }
  if (typeof value !== 'object' || value === null || Array.isArray(value)) {
    return dropped('bad_type', `expected a JSON object, got ${quote(value)}`);
  }
  const record = value as Record<string, unknown>;
  for (const key of Object.keys(record)) {
    if (!keys.includes(key)) return dropped('unknown_key', `unknown key ${quote(key)}; expected exactly ${keys.join(', ')}`);
  }
  const missing = keys.filter((k) => !Object.hasOwn(record, k));
  if (missing.length > 0) return dropped('missing_field', `missing ${missing.join(', ')}; expected exactly ${keys.join(', ')}`);
  return { ok: true, record };
}

/** A finite JSON number, or the reason it is not one (`field` names it in the detail). */
export function finiteNumber(value: unknown, field: string): { ok: true; value: number } | Dropped {
  if (typeof value !== 'number') return dropped('bad_type', `${field} must be a number, got ${quote(value)}`);
  // JSON cannot spell NaN, but 1e400 parses to Infinity.
  if (!Number.isFinite(value)) return dropped('non_finite', `${field} must be finite, got ${quote(value)}`);
  return { ok: true, value };
}
