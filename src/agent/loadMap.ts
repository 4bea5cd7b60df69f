/** Reads and validates the agent's asset map, with the text's SHA-256 as its identity in presence. */
import { createHash } from 'node:crypto';
import { readTextFile } from '../acquisition/readTextFile.ts';
import type { ConfigProblem } from '../config/configProblem.ts';
import { MAX_MAP_BYTES, parseAssetMap } from '../config/parseAssetMap.ts';
import type { SiteMap } from '../config/types.ts';

export interface LoadedMap {
  map: SiteMap;
  sha256: string;
  /** The map's text, for advisories that quote its lines. */
  text: string;
}

export async function loadMap(path: string): Promise<LoadedMap | { problems: ConfigProblem[] }> {
  const text = await readTextFile(path, MAX_MAP_BYTES, 'asset map', 'QB_E_CONFIG_TOO_LARGE');
  const result = parseAssetMap(text, path);
  if (!result.map) return { problems: result.problems };
  return { map: result.map, sha256: createHash('sha256').update(text).digest('hex'), text };
}
