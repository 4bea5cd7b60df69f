/**
 * The `--http <host:port>` value: `127.0.0.1:8080`, `[::1]:8080`, `0.0.0.0:8080` (every
 * interface: the site says so), or `:8080` / `8080` for loopback. Port 0 picks a free one.
 */
import { quote } from '../text/printable.ts';

export interface HttpAddress {
  host: string;
  port: number;
}

export const DEFAULT_HTTP_HOST = '127.0.0.1';

export function parseHttpAddress(text: string): HttpAddress | string {
  const m = /^(?:(\[[0-9A-Fa-f:.]+\]|[A-Za-z0-9.-]*):)?(\d{1,5})$/.exec(text);
  const port = m ? Number(m[2]) : NaN;
  if (!m || !(port >= 0 && port <= 65535)) return `--http must be host:port (e.g. 127.0.0.1:8080), got ${quote(text)}`;
  const host = m[1] ? m[1].replace(/^\[|\]$/g, '') : DEFAULT_HTTP_HOST;
  return { host, port };
}
