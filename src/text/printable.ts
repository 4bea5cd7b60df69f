/**
 * Values that come from outside (a map, a recording, a command line, a message) are echoed in
 * messages and logs only through these functions: control bytes, bidirectional overrides and
 * other invisible format characters are written as escapes, so a value cannot retitle a
 * terminal, hide text or reorder a line, and a long value is cut with the count of what was
 * left out, so a 10 MB scalar cannot flood a log.
 */

/** Characters a value keeps at most when echoed. */
export const MAX_ECHO_CHARS = 80;

/**
 * C0 and C1 controls, DEL, and the format characters that change how text around them shows:
 * bidirectional marks, embeddings, overrides and isolates, zero-width characters, the byte
 * order mark, line and paragraph separators.
 */
const UNSAFE = /[\u0000-\u001f\u007f-\u009f\u061c\u200b-\u200f\u2028-\u202e\u2060-\u2069\ufeff\ufff9-\ufffb]/g;

function escapeChar(c: string): string {
  switch (c) {
    case '\n':
      return '\\n';
    case '\r':
      return '\\r';
    case '\t':
      return '\\t';
    default: {
      const code = c.charCodeAt(0);
      return code <= 0xff ? `\\x${code.toString(16).padStart(2, '0')}` : `\\u${code.toString(16).padStart(4, '0')}`;
    }
  }
}

/** `text` with every unsafe character escaped, cut to about `maxChars` characters. */
export function printable(text: string, maxChars = MAX_ECHO_CHARS): string {
  let head = text;
  let cut = 0;
  if (text.length > maxChars) {
    head = text.slice(0, maxChars);
    // Do not split a surrogate pair.
    if (/[\ud800-\udbff]$/.test(head)) head = head.slice(0, -1);
    cut = text.length - head.length;
  }
  const safe = head.replace(UNSAFE, escapeChar).replace(/[\ud800-\udfff]/g, (c, i: number, s: string) => {
    // A lone surrogate is not text; a well-formed pair is kept.
    const code = c.charCodeAt(0);
    const pairedHigh = code <= 0xdbff && /[\udc00-\udfff]/.test(s[i + 1] ?? '');
    const pairedLow = code >= 0xdc00 && /[\ud800-\udbff]/.test(s[i - 1] ?? '');
    return pairedHigh || pairedLow ? c : escapeChar(c);
  });
  return cut > 0 ? `${safe}... (${cut} more characters)` : safe;
}

/** A value in single quotes, made printable: `'north-basin'`. */
export function quote(text: string, maxChars = MAX_ECHO_CHARS): string {
  return `'${printable(text, maxChars)}'`;
}

/** True when `text` holds nothing `printable` would escape (newlines between lines allowed). */
export function isPrintable(text: string): boolean {
  UNSAFE.lastIndex = 0;
  return !/[\u0000-\u0009\u000b-\u001f\u007f-\u009f\u061c\u200b-\u200f\u2028-\u202e\u2060-\u2069\ufeff\ufff9-\ufffb]/.test(text);
}
