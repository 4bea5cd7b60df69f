/**
 * The one reader of numbers written by people or other programs (recording CSV, speed CSV,
 * command-line values): a plain decimal with an optional exponent. No hexadecimal, binary or
 * octal prefixes, no 'Infinity', no empty string, no inner spaces: `Number()` would accept
 * `0x10`, `''` and ' ' and read them as 16 and 0.
 */
const DECIMAL = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;

/** The value of `text` (outer spaces ignored), or NaN when it is not a plain decimal; may be +-Infinity when it overflows. */
export function parseDecimal(text: string): number {
  const t = text.trim();
  return DECIMAL.test(t) ? Number(t) : Number.NaN;
}
