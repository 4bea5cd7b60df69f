/**
 * The operator page's token: acknowledge and shelve from the page need it; without one
 * configured the page is read-only. From the environment (QBAND_HTTP_TOKEN) or a file
 * (QBAND_HTTP_TOKEN_FILE), never from the map. Compared in constant time.
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { QbandError } from '../errors.ts';

export const MIN_TOKEN_CHARS = 16;

export async function pageToken(env: NodeJS.ProcessEnv, cwd: string): Promise<string | null> {
  let token = env.QBAND_HTTP_TOKEN ?? null;
  const file = env.QBAND_HTTP_TOKEN_FILE;
  if (file) {
    try {
      token = (await readFile(resolve(cwd, file), 'utf8')).trim();
    } catch (err) {
      throw new QbandError('QB_E_HTTP_TOKEN', `cannot read QBAND_HTTP_TOKEN_FILE: ${(err as NodeJS.ErrnoException).code ?? (err as Error).message}`);
    }
  }
  if (token === null || token === '') return null;
  if (token.length < MIN_TOKEN_CHARS) throw new QbandError('QB_E_HTTP_TOKEN', `the operator page token is ${token.length} characters; it needs at least ${MIN_TOKEN_CHARS}`);
  return token;
}

/** Whether an Authorization header carries the token (`Bearer <token>`). */
export function tokenMatches(expected: string | null, header: string | undefined): boolean {
  if (expected === null || !header?.startsWith('Bearer ')) return false;
  const digest = (s: string) => createHash('sha256').update(s).digest();
  return timingSafeEqual(digest(header.slice(7).trim()), digest(expected));
}
