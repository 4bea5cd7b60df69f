/**
 * How every command reads its asset map and names an asset of it: the same messages, the same
 * exit codes. A map that cannot be read and a map that is not valid are both exit 1 (an input
 * that cannot be used); each problem is one stderr line `<map>: error <code> <message>`, and
 * when more were found than are listed, one line says how many more.
 */
import { resolve } from 'node:path';
import { loadAssetMapFile, type AssetMapResult } from '../config/parseAssetMap.ts';
import type { AssetConfig } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import { printable, quote } from '../text/printable.ts';
import { reportFailure } from './failure.ts';
import type { CliIo } from './io.ts';

/** The map's result (valid or not), or the exit code when the file could not be read. */
export async function readMapForCommand(io: CliIo, command: string, mapArg: string): Promise<AssetMapResult | number> {
  try {
    return await loadAssetMapFile(resolve(io.cwd, mapArg));
  } catch (err) {
    return reportFailure(io, command, err);
  }
}

/** Every problem and warning on stderr, with the count of those not listed. */
export function writeMapProblems(io: CliIo, mapArg: string, result: AssetMapResult): void {
  const name = printable(mapArg, 200);
  for (const p of result.problems) io.stderr.write(`${name}: error ${p.code} ${p.message}\n`);
  if (result.moreProblems > 0) io.stderr.write(`${name}: and ${result.moreProblems} more problem${result.moreProblems === 1 ? '' : 's'} not listed\n`);
  for (const w of result.warnings) io.stderr.write(`${name}: warning ${w.code} ${w.message}\n`);
  if (result.moreWarnings > 0) io.stderr.write(`${name}: and ${result.moreWarnings} more warning${result.moreWarnings === 1 ? '' : 's'} not listed\n`);
}

/** All problems found, listed or not. */
export function problemCount(result: AssetMapResult): number {
  return result.problems.length + result.moreProblems;
}

/**
 * The asset `id` names, or the only one when `id` is undefined. A wrong or missing choice is
 * a fault of the input against this map (QB_E_ASSET_UNKNOWN), not of the command line.
 */
export function pickAsset(assets: readonly AssetConfig[], id: string | undefined, how = 'name one with --asset'): AssetConfig {
  const ids = assets.map((a) => a.id).join(', ');
  if (id === undefined) {
    if (assets.length === 1) return assets[0];
    throw new QbandError('QB_E_ASSET_UNKNOWN', `the map has ${assets.length} assets (${ids}); ${how}`);
  }
  const asset = assets.find((a) => a.id === id);
  if (!asset) throw new QbandError('QB_E_ASSET_UNKNOWN', `no asset ${quote(id)} in the map; it has: ${ids}`);
  return asset;
}
