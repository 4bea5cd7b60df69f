/**
 * The agent's side of the durable journal: opening it (and saying what it found) and writing
 * every runtime's snapshot into it.
 */
import type { AssetRuntime } from './assetRuntime.ts';
import { Journal } from './journal.ts';
import type { Logger } from './logger.ts';

export function openAgentJournal(dir: string, log: Logger): Journal {
  const journal = Journal.open(dir);
  const r = journal.openReport;
  if (r.truncatedBytes > 0) {
    log.warn({ stage: 'agent', code: 'QB_E_JOURNAL_TORN', path: journal.path, cut_bytes: r.truncatedBytes }, 'journal ended in a torn or corrupt record; it was cut there');
  }
  log.info({ stage: 'agent', code: 'QB_I_JOURNAL', path: journal.path, pending: r.pending, assets: r.snapshots }, 'journal opened');
  return journal;
}

/** Each runtime's snapshot into the journal; a failure is logged per asset and the rest go on. */
export function persistSnapshots(journal: Journal, runtimes: Iterable<AssetRuntime>, log: Logger): void {
  for (const runtime of runtimes) {
    try {
      journal.appendSnapshot(runtime.asset.id, runtime.snapshot());
    } catch (err) {
      log.error({ stage: 'agent', code: 'QB_E_JOURNAL_WRITE', asset: runtime.asset.id, err: (err as Error).message }, 'cannot write the journal');
    }
  }
}
