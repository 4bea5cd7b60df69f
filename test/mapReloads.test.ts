import { writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { firstValueFrom, take } from 'rxjs';
import { TestScheduler } from 'rxjs/testing';
import { describe, expect, it } from 'vitest';
import { fileChanges, mapReloads } from '../src/agent/mapReloads.ts';
import { tempDir } from './support/liveRig.ts';

// Map reloads on RxJS virtual time: settled changes, one reload at a time.
describe('map reloads', () => {
  it('waits for the file to be quiet for the settle time, then reloads once', () => {
    new TestScheduler((a, e) => expect(a).toEqual(e)).run(({ cold, hot, expectObservable }) => {
      const changes = hot('a 50ms b 50ms c 400ms d');
      const reload = () => cold('(r|)', { r: 'reloaded' });
      // c at 102, quiet until 352: one reload; d at 503: another at 753.
      expectObservable(mapReloads(changes, reload, 250)).toBe('352ms r 400ms r', { r: 'reloaded' });
    });
  });

  it('a change during a slow reload queues one more after it, never two at once', () => {
    new TestScheduler((a, e) => expect(a).toEqual(e)).run(({ cold, hot, expectObservable, expectSubscriptions }) => {
      const changes = hot('a 300ms b');
      const slow = cold('500ms (r|)', { r: 1 });
      const out = mapReloads(changes, () => slow, 250);
      // a at 0 -> reload 250..750; b at 301 settles at 551, during the first: the second runs 750..1250.
      expectObservable(out).toBe('750ms r 499ms r', { r: 1 });
      expectSubscriptions(slow.subscriptions).toBe(['250ms ^ 499ms !', '750ms ^ 499ms !']);
    });
  });

  it('fileChanges: a write to the file is an event; unsubscribing closes the watcher', async () => {
    const file = join(tempDir(), 'map.yaml');
    writeFileSync(file, 'site: a\n');
    const first = firstValueFrom(fileChanges(file).pipe(take(1)));
    setTimeout(() => writeFileSync(file, 'site: b\n'), 50);
    await expect(first).resolves.toBeUndefined();
  });

  it('fileChanges: a missing file is an error, not a throw', async () => {
    await expect(firstValueFrom(fileChanges(join(tempDir(), 'none.yaml')))).rejects.toThrow(/ENOENT/);
  });
});
