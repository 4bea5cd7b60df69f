/**
 * What the agent logs about its inputs and its load, kept out of the agent's wiring: dropped
 * inputs (rate-limited per topic and reason) and the overload rule switching spectra on and off.
 */
import type { DropNote } from './assetRuntime.ts';
import type { Logger, RateLimitedLog } from './logger.ts';
import type { AssetTopics } from './topics.ts';
import type { LoadChange } from './workers/runtimeHost.ts';

export function logDrops(asset: string, topics: AssetTopics, drops: readonly DropNote[], limiter: RateLimitedLog, log: Logger, nowMs: number): void {
  for (const d of drops) {
    const held = limiter.admit(`${d.topic}|${d.reason}`, nowMs);
    if (held === null) continue;
    const sensor = topics.samples.get(d.topic)?.id;
    const code = d.topic === topics.command ? 'QB_E_COMMAND_REJECTED' : 'QB_E_INPUT_DROPPED';
    log.warn({ stage: 'acquisition', code, asset, sensor, topic: d.topic, reason: d.reason, held_back: held }, d.detail);
  }
}

/**
 * The overload rule (docs/security.md) switched: past the busy threshold the engines of a
 * thread (the agent's, or one worker's) shed their spectra; the switch itself is applied
 * where the runtimes live (workers/runtimeGroup.ts), and said here.
 */
export function logLoadChange(change: LoadChange, log: Logger): void {
  const where = change.worker === undefined ? {} : { worker: change.worker };
  const whose = change.worker === undefined ? '' : ` (the assets of worker ${change.worker})`;
  if (change.shedding) log.warn({ stage: 'agent', code: 'QB_E_OVERLOAD', busy_fraction: change.busy, ...where }, `overloaded${whose}: spectra shed, speed and dwell decisions go on`);
  else log.info({ stage: 'agent', code: 'QB_I_LOAD_OK', busy_fraction: change.busy, ...where }, `load back to normal${whose}: spectra resume`);
}
