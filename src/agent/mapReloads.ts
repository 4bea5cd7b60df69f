/**
 * Map reloads as a stream: the map file's change events, settled (editors write a file in
 * several steps, so a reload waits until the file has been quiet for `settleMs`), then one reload
 * at a time: a change that comes while a reload runs queues one more after it, never a second
 * reload beside the first. With RxJS the debounce, the queue and the teardown (the watcher closed
 * on unsubscribe) are one pipeline; the scheduler is a parameter so tests run it on virtual time.
 */
import { watch } from 'node:fs';
import { concatMap, debounceTime, Observable, type ObservableInput, type SchedulerLike } from 'rxjs';

/** The file's change events; the watcher closes when the last subscriber leaves. */
export function fileChanges(path: string): Observable<void> {
  return new Observable<void>((subscriber) => {
    const watcher = watch(path, () => subscriber.next());
    watcher.on('error', (err) => subscriber.error(err));
    return () => watcher.close();
  });
}

export function mapReloads<T>(changes: Observable<unknown>, reload: () => ObservableInput<T>, settleMs: number, scheduler?: SchedulerLike): Observable<T> {
  return changes.pipe(
    debounceTime(settleMs, scheduler),
    concatMap(() => reload()),
  );
}
