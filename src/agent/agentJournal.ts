/**
 * The agent's side of the durable journal: opening it (and saying what it found) and writing
 * runtimes' snapshots into it.
 */
import { Journal } from './journal.ts';
import type { Logger } from './logger.ts';
import type { AssetSnapshot } from './workers/runtimeHost.ts';

export function openAgentJournal(dir: string, log: Logger): Journal {
  const journal = Journal.open(dir);
  const r = journal.openReport;
  if (r.truncatedBytes > 0) {
    log.warn({ stage: 'agent', code: 'QB_E_JOURNAL_TORN', path: journal.path, cut_bytes: r.truncatedBytes }, 'journal ended in a torn or corrupt record; it was cut there');
  }
  log.info({ stage: 'agent', code: 'QB_I_JOURNAL', path: journal.path, pending: r.pending, assets: r.snapshots }, 'journal opened');
  return journal;
}

/** Runtimes' snapshots into the journal; a failure is logged per asset and the rest go on. */
export function persistSnapshots(journal: Journal, snapshots: Iterable<AssetSnapshot>, log: Logger): void {
  for (const { asset, snapshot } of snapshots) {
    try {
      journal.appendSnapshot(asset, snapshot);
    } catch (err) {
      log.error({ stage: 'agent', code: 'QB_E_JOURNAL_WRITE', asset, err: (err as Error).message }, 'cannot write the journal');
    }
  }
}
