import { describe, expect, it } from 'vitest';
import { decodeSpeedRecord } from '../src/acquisition/speedPayload.ts';

// Rules from docs/payloads.md ("Speed records"): exactly {t, rpm}; rpm from 0 to twice the top
// of range_rpm. The range [600, 1800] rpm is a made-up pump range, so the ceiling is 3600 rpm.
const range: [number, number] = [600, 1800];
const text = (s: string) => new TextEncoder().encode(s);

describe('decodeSpeedRecord', () => {
  it.each([
    ['inside the range', '{"t":1700000000.5,"rpm":1480}', 1_700_000_000.5, 1480],
    ['stopped (0 rpm)', '{"t":1,"rpm":0}', 1, 0],
    ['below the range (coasting down)', '{"rpm":12.5,"t":2}', 2, 12.5],
    ['exactly on the ceiling, 2 x 1800', ' {"t":3, "rpm":3600}\n', 3, 3600],
  ])('accepts %s', (_name, payload, tS, rpm) => {
    expect(decodeSpeedRecord(text(payload), range), payload).toEqual({ ok: true, tS, rpm });
  });

  it('-0 rpm reads as 0', () => {
    const r = decodeSpeedRecord(text('{"t":1,"rpm":-0}'), range);
    expect(r.ok && Object.is(r.rpm, 0)).toBe(true);
  });

  it.each([
    ['just above the ceiling', '{"t":1,"rpm":3600.001}', 'speed_out_of_range', /from 0 to 3600 .* got 3600.001/],
    ['negative', '{"t":1,"rpm":-1}', 'speed_out_of_range', /got -1/],
    ['rpm 1e400', '{"t":1,"rpm":1e400}', 'non_finite', /rpm must be finite/],
    ['rpm as text', '{"t":1,"rpm":"1480"}', 'bad_type', /rpm must be a number, got "1480"/],
    ['rpm null', '{"t":1,"rpm":null}', 'bad_type', /got null/],
    ['t as text', '{"t":"now","rpm":1}', 'bad_type', /t must be a number/],
    ['missing t', '{"rpm":1}', 'missing_field', /missing t/],
    ['extra key', '{"t":1,"rpm":1,"source":"vfd"}', 'unknown_key', /unknown key "source"; expected exactly t, rpm/],
    ['a bare number', '1480', 'unknown_format', /0x31/],
    ['a binary sample block', 'qb\u0001\u0001', 'unknown_format', /0x71/],
    ['truncated', '{"t":1,"rpm":', 'bad_json', /./],
    ['longer than 4096 bytes', `{"t":1,"rpm":1${' '.repeat(4096)}}`, 'oversize', /4096-byte limit/],
  ])('drops %s', (_name, payload, reason, detail) => {
    const r = decodeSpeedRecord(text(payload), range);
    expect(r, `input ${payload.slice(0, 60)}`).toMatchObject({ ok: false, reason });
    expect(r.ok ? '' : r.detail).toMatch(detail);
  });
});
