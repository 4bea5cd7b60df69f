/** Reads and validates the agent's asset map, with the text's SHA-256 as its identity in presence. */
import { createHash } from 'node:crypto';
import { readFile } from 'node:fs/promises';
import type { ConfigProblem } from '../config/configProblem.ts';
import { parseAssetMap } from '../config/parseAssetMap.ts';
import type { SiteMap } from '../config/types.ts';
import { QbandError } from '../errors.ts';

export interface LoadedMap {
  map: SiteMap;
  sha256: string;
}

export async function loadMap(path: string): Promise<LoadedMap | { problems: ConfigProblem[] }> {
  const text = await readFile(path, 'utf8').catch((cause) => {
    throw new QbandError('QB_E_FILE_READ', `cannot read asset map '${path}' (${(cause as NodeJS.ErrnoException).code ?? cause})`, { cause });
  });
  const result = parseAssetMap(text, path);
  if (!result.map) return { problems: result.problems };
  return { map: result.map, sha256: createHash('sha256').update(text).digest('hex') };
}
