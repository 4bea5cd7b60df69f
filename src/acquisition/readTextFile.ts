/**
 * Reads a whole text file that a person names (map, profile, speed series) with a bound: at
 * most `maxBytes` + 1 bytes are read, whatever the file (a device or a pipe included), so a
 * larger one is refused without being held. Errors are QbandErrors that name the file as given.
 */
import { open } from 'node:fs/promises';
import { QbandError, type ErrorCode } from '../errors.ts';
import { formatMiB } from '../text/formatMiB.ts';
import { printable } from '../text/printable.ts';

/** `what` names the file in messages, e.g. "asset map '/etc/qband/map.yaml'". */
export async function readTextFile(path: string, maxBytes: number, what: string, tooLarge: ErrorCode): Promise<string> {
  const shown = `${what} '${printable(path, 200)}'`;
  try {
    const fh = await open(path, 'r');
    try {
      const buf = Buffer.alloc(maxBytes + 1);
      let got = 0;
      while (got < buf.length) {
        const { bytesRead } = await fh.read(buf, got, buf.length - got, null);
        if (bytesRead === 0) break;
        got += bytesRead;
      }
      if (got > maxBytes) throw new QbandError(tooLarge, `${shown} is larger than ${formatMiB(maxBytes)}, the most qband reads`);
      return buf.toString('utf8', 0, got);
    } finally {
      await fh.close();
    }
  } catch (cause) {
    if (cause instanceof QbandError) throw cause;
    const errno = (cause as NodeJS.ErrnoException).code;
    const reason =
      errno === 'EISDIR' ? 'it is a directory' : errno === 'ENOENT' ? 'no such file' : errno === 'EACCES' ? 'permission denied' : (errno ?? String(cause));
    throw new QbandError('QB_E_FILE_READ', `cannot read ${shown} (${reason})`, { cause });
  }
}
