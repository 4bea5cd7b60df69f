/**
 * What the engine must remember to carry on after a restart or a reload of the map: the alarm
 * state and exposure of each (component, order) pair and component, the decision clock, and
 * where the data had got to. Signal history (spectra, tach edges) is not kept: it rebuilds
 * within one averaging span. Each entry carries a signature of the configuration it was made
 * under; a changed component, order or alarm setting starts afresh instead of inheriting.
 */
import type { OutsideBandReference } from '../advisory/records.ts';
import type { AssetConfig, ComponentConfig } from '../config/types.ts';
import { DwellAlarm, type DwellSnapshot } from '../detection/dwellAlarm.ts';
import type { Exposure } from '../detection/exposure.ts';
import { pairKey, type PairState } from './pairState.ts';

export interface EngineSnapshot {
  version: 1;
  asset: string;
  /** Event time just after the last sample seen on any bound channel. */
  dataEndS: number | null;
  startS: number | null;
  nextDecisionS: number | null;
  nextStatusS: number | null;
  lastDecisionS: number | null;
  counts: EventCounts;
  speedStats: { knownS: number; unknownS: number; minRpm: number | null; maxRpm: number | null };
  outageS: number;
  pairs: Array<{ key: string; signature: string; dwell: DwellSnapshot; cyclesInDwell: number; outside: OutsideBandReference | null }>;
  exposure: Array<{ component: string; signature: string; secondsInBand: number; cycles: number }>;
}

export interface EventCounts {
  raise: number;
  escalate: number;
  clear: number;
}

/** Seconds of decisions with and without a known speed, and the speeds seen (Infinity when none). */
export interface SpeedStats {
  knownS: number;
  unknownS: number;
  minRpm: number;
  maxRpm: number;
}

/** The decision clock and the run's tallies: everything of the engine's own a snapshot keeps. */
export interface DecisionProgress {
  startS: number | null;
  nextDecisionS: number | null;
  nextStatusS: number | null;
  lastDecisionS: number | null;
  /** Data time skipped because no channel had data (outages, restarts). */
  outageS: number;
  counts: EventCounts;
  speedStats: SpeedStats;
}

export function newProgress(): DecisionProgress {
  return {
    startS: null,
    nextDecisionS: null,
    nextStatusS: null,
    lastDecisionS: null,
    outageS: 0,
    counts: { raise: 0, escalate: 0, clear: 0 },
    speedStats: { knownS: 0, unknownS: 0, minRpm: Infinity, maxRpm: -Infinity },
  };
}

/** What a pair's alarm state depends on: its band, its order's multiple and the alarm settings. */
function pairSignature(p: PairState, asset: AssetConfig): string {
  return JSON.stringify([p.component.fnHz, p.component.bandHz, p.order.multiple, asset.alarm]);
}

function componentSignature(c: ComponentConfig): string {
  return JSON.stringify([c.fnHz, c.bandHz]);
}

export function takeSnapshot(
  asset: AssetConfig,
  progress: DecisionProgress,
  dataEndS: number | null,
  pairs: readonly PairState[],
  exposures: ReadonlyMap<string, Exposure>,
): EngineSnapshot {
  const st = progress.speedStats;
  return {
    version: 1,
    asset: asset.id,
    dataEndS,
    startS: progress.startS,
    nextDecisionS: progress.nextDecisionS,
    nextStatusS: progress.nextStatusS,
    lastDecisionS: progress.lastDecisionS,
    counts: { ...progress.counts },
    speedStats: {
      knownS: st.knownS,
      unknownS: st.unknownS,
      minRpm: Number.isFinite(st.minRpm) ? st.minRpm : null,
      maxRpm: Number.isFinite(st.maxRpm) ? st.maxRpm : null,
    },
    outageS: progress.outageS,
    pairs: pairs.map((p) => ({
      key: pairKey(p),
      signature: pairSignature(p, asset),
      dwell: p.alarm.snapshot(),
      cyclesInDwell: p.cyclesInDwell,
      outside: p.outside,
    })),
    exposure: asset.components.map((c) => {
      const e = exposures.get(c.id) as Exposure;
      return { component: c.id, signature: componentSignature(c), secondsInBand: e.secondsInBand, cycles: e.cycles };
    }),
  };
}

/** Refuses a snapshot of another asset or format version. */
export function checkSnapshotFor(snapshot: EngineSnapshot, asset: AssetConfig): void {
  if (snapshot.version !== 1 || snapshot.asset !== asset.id) {
    throw new Error(`snapshot of asset ${snapshot.asset} (version ${snapshot.version}) cannot restore engine of ${asset.id}`);
  }
}

/**
 * Puts a snapshot's state into a fresh engine's parts (pairs, exposures, progress). Returns
 * which pairs carried their state over and which started afresh because their configuration
 * changed.
 */
export function applySnapshot(
  snapshot: EngineSnapshot,
  asset: AssetConfig,
  statusEveryS: number | undefined,
  progress: DecisionProgress,
  pairs: readonly PairState[],
  exposures: ReadonlyMap<string, Exposure>,
): { restored: string[]; fresh: string[] } {
  checkSnapshotFor(snapshot, asset);
  const restored: string[] = [];
  const fresh: string[] = [];
  const old = new Map(snapshot.pairs.map((p) => [p.key, p]));
  for (const pair of pairs) {
    const key = pairKey(pair);
    const was = old.get(key);
    if (was && was.signature === pairSignature(pair, asset)) {
      pair.alarm = new DwellAlarm(asset.alarm, was.dwell);
      pair.cyclesInDwell = was.cyclesInDwell;
      pair.outside = was.outside;
      restored.push(key);
    } else fresh.push(key);
  }
  const oldExposure = new Map(snapshot.exposure.map((e) => [e.component, e]));
  for (const c of asset.components) {
    const was = oldExposure.get(c.id);
    if (was && was.signature === componentSignature(c)) {
      const e = exposures.get(c.id) as Exposure;
      e.secondsInBand = was.secondsInBand;
      e.cycles = was.cycles;
    }
  }
  progress.startS = snapshot.startS;
  progress.nextDecisionS = snapshot.nextDecisionS;
  progress.lastDecisionS = snapshot.lastDecisionS;
  progress.nextStatusS = statusEveryS ? snapshot.nextStatusS ?? (snapshot.lastDecisionS ?? 0) + statusEveryS : null;
  Object.assign(progress.counts, snapshot.counts);
  progress.speedStats.knownS = snapshot.speedStats.knownS;
  progress.speedStats.unknownS = snapshot.speedStats.unknownS;
  progress.speedStats.minRpm = snapshot.speedStats.minRpm ?? Infinity;
  progress.speedStats.maxRpm = snapshot.speedStats.maxRpm ?? -Infinity;
  progress.outageS = snapshot.outageS;
  return { restored, fresh };
}
