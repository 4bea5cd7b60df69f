/**
 * What the agent logs about its inputs and its load, kept out of the agent's wiring: dropped
 * inputs (rate-limited per topic and reason) and the overload rule switching spectra on and off.
 */
import type { AssetRuntime, DropNote } from './assetRuntime.ts';
import type { BusyMeter } from './busyMeter.ts';
import type { Logger, RateLimitedLog } from './logger.ts';

export function logDrops(runtime: AssetRuntime, drops: readonly DropNote[], limiter: RateLimitedLog, log: Logger, nowMs: number): void {
  for (const d of drops) {
    const held = limiter.admit(`${d.topic}|${d.reason}`, nowMs);
    if (held === null) continue;
    const sensor = runtime.topics.samples.get(d.topic)?.id;
    const code = d.topic === runtime.topics.command ? 'QB_E_COMMAND_REJECTED' : 'QB_E_INPUT_DROPPED';
    log.warn({ stage: 'acquisition', code, asset: runtime.asset.id, sensor, topic: d.topic, reason: d.reason, held_back: held }, d.detail);
  }
}

/** The overload rule (docs/security.md): past the busy threshold every engine sheds its spectra. */
export function applyLoadRule(load: BusyMeter, runtimes: Iterable<AssetRuntime>, log: Logger): void {
  const change = load.sample(performance.now());
  if (!change) return;
  for (const runtime of runtimes) runtime.shedSpectra = change.shedding;
  if (change.shedding) log.warn({ stage: 'agent', code: 'QB_E_OVERLOAD', busy_fraction: change.busy }, 'overloaded: spectra shed, speed and dwell decisions go on');
  else log.info({ stage: 'agent', code: 'QB_I_LOAD_OK', busy_fraction: change.busy }, 'load back to normal: spectra resume');
}
