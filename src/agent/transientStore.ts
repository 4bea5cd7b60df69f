/**
 * Keeps an asset's last transients in the state directory, so that a restart loses none of the
 * sweeps its identification rests on: one JSON file per asset, `transients-<asset>.json`,
 * rewritten whole (to a temporary file, then renamed over the old one) whenever a transient is
 * added. Transients come minutes apart at most, so the rewrite costs nothing that matters.
 */
import { existsSync, mkdirSync, readFileSync, renameSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import type { TransientRecord } from '../transients/transientRecord.ts';
import { componentLines } from '../config/mapLines.ts';
import type { AssetRuntime } from './assetRuntime.ts';

/** The few logger calls made here (the agent's pino logger, or a worker's forwarder). */
export interface LogSink {
  info(fields: Record<string, unknown>, msg: string): void;
  warn(fields: Record<string, unknown>, msg: string): void;
  error(fields: Record<string, unknown>, msg: string): void;
}

function storePath(stateDir: string, assetId: string): string {
  return join(stateDir, `transients-${encodeURIComponent(assetId)}.json`);
}

/** The transients saved for an asset (none when there is no file, or it cannot be read). */
export function loadTransients(stateDir: string, assetId: string, log: LogSink): TransientRecord[] {
  const path = storePath(stateDir, assetId);
  if (!existsSync(path)) return [];
  try {
    const parsed: unknown = JSON.parse(readFileSync(path, 'utf8'));
    if (!Array.isArray(parsed)) throw new Error('not a list of transient records');
    return parsed.filter((r): r is TransientRecord => typeof r === 'object' && r !== null && r.kind === 'transient' && r.asset === assetId && Array.isArray(r.orders));
  } catch (err) {
    log.warn({ stage: 'agent', code: 'QB_E_TRANSIENTS_READ', asset: assetId, path, err: (err as Error).message }, 'saved transients could not be read; starting without them');
    return [];
  }
}

export function saveTransients(stateDir: string, assetId: string, records: readonly TransientRecord[]): void {
  mkdirSync(stateDir, { recursive: true });
  const path = storePath(stateDir, assetId);
  writeFileSync(`${path}.tmp`, JSON.stringify(records));
  renameSync(`${path}.tmp`, path);
}

/**
 * Wires a runtime's transient learning to the state directory (restore now, save on change)
 * and to the map's text (the lines its drift advisories show).
 */
export function attachTransientStore(runtime: AssetRuntime, stateDir: string | null, mapText: string | null, log: LogSink): void {
  const id = runtime.asset.id;
  if (mapText !== null) runtime.learning.linesOf = (componentId) => componentLines(mapText, id, componentId);
  if (stateDir === null) return;
  const saved = loadTransients(stateDir, id, log);
  runtime.learning.restore(saved);
  if (saved.length > 0) log.info({ stage: 'agent', code: 'QB_I_TRANSIENTS', asset: id, transients: saved.length }, 'saved transients restored');
  runtime.learning.onKeptChanged = (kept) => {
    try {
      saveTransients(stateDir, id, kept);
    } catch (err) {
      log.error({ stage: 'agent', code: 'QB_E_TRANSIENTS_WRITE', asset: id, err: (err as Error).message }, 'cannot save transients');
    }
  };
}
