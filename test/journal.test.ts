import { appendFileSync, readFileSync, statSync, truncateSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { decodeLine, encodeLine, Journal, JOURNAL_FILE } from '../src/agent/journal.ts';
import type { RuntimeSnapshot } from '../src/agent/assetRuntime.ts';
import { tempDir } from './support/liveRig.ts';

const snap = (n: number) => ({ engine: { marker: n }, operator: [] }) as unknown as RuntimeSnapshot;
const event = (id: string) => ({ id, topic: 'qband/cw-pump-2/alarm', payload: JSON.stringify({ id }) });

describe('journal', () => {
  it('keeps events pending until acknowledged, across a reopen, in order', () => {
    const dir = tempDir();
    const j = Journal.open(dir);
    const [a, b] = j.appendEvents('cw-pump-2', [event('a'), event('b')], snap(1));
    j.appendEvents('cw-pump-2', [event('c')], snap(2));
    j.acknowledge([a.seq]);
    j.close();
    const again = Journal.open(dir);
    expect(again.pending().map((e) => e.id)).toEqual(['b', 'c']);
    expect(again.snapshot('cw-pump-2')).toEqual(snap(2));
    expect(again.openReport).toMatchObject({ truncatedBytes: 0, pending: 2 });
    // New events continue the numbering: seqs never repeat.
    const [d] = again.appendEvents('cw-pump-2', [event('d')], null);
    expect(d.seq).toBeGreaterThan(b.seq + 1);
  });

  it('cuts a torn last line (a write cut short by a power loss) and keeps everything before it', () => {
    const dir = tempDir();
    const j = Journal.open(dir);
    j.appendEvents('cw-pump-2', [event('a')], snap(1));
    j.close();
    const path = join(dir, JOURNAL_FILE);
    const good = statSync(path).size;
    const line = encodeLine({ op: 'events', events: [{ seq: 9, ...event('torn') }], asset: 'cw-pump-2', snapshot: snap(3) });
    appendFileSync(path, line.slice(0, line.length - 20)); // no newline, half a record
    const again = Journal.open(dir);
    expect(again.openReport.truncatedBytes).toBe(line.length - 20);
    expect(again.pending().map((e) => e.id)).toEqual(['a']);
    expect(again.snapshot('cw-pump-2')).toEqual(snap(1));
    expect(statSync(path).size).toBe(good);
  });

  it('stops at a line whose checksum fails (a corrupt sector), never trusting what follows', () => {
    const dir = tempDir();
    const j = Journal.open(dir);
    j.appendEvents('cw-pump-2', [event('a')], snap(1));
    j.appendEvents('cw-pump-2', [event('b')], snap(2));
    j.close();
    const path = join(dir, JOURNAL_FILE);
    const text = readFileSync(path, 'utf8');
    const second = text.indexOf('\n') + 1;
    writeFileSync(path, text.slice(0, second + 20) + (text[second + 20] === 'x' ? 'y' : 'x') + text.slice(second + 21));
    const again = Journal.open(dir);
    expect(again.pending().map((e) => e.id)).toEqual(['a']);
    expect(again.openReport.truncatedBytes).toBe(text.length - second);
  });

  it('rejects lines that do not match their checksum or lack the separator', () => {
    const good = encodeLine({ op: 'acked', seqs: [1] }).trimEnd();
    expect(decodeLine(Buffer.from(good))).toEqual({ op: 'acked', seqs: [1] });
    expect(decodeLine(Buffer.from(good.replace('[1]', '[2]')))).toBeNull();
    expect(decodeLine(Buffer.from(good.replace(' ', '')))).toBeNull();
    expect(decodeLine(Buffer.from(''))).toBeNull();
  });

  it('stays bounded: compaction keeps only pending events and the latest snapshots', () => {
    const dir = tempDir();
    const j = Journal.open(dir, { maxBytes: 4096 });
    const keep = j.appendEvents('cw-pump-2', [event('kept')], snap(0));
    for (let i = 1; i <= 500; i++) {
      const [e] = j.appendEvents('cw-pump-2', [event(`e${i}`)], snap(i));
      j.acknowledge([e.seq]);
    }
    j.close();
    // The bound is checked after each append, so the file may exceed it by at most one record
    // (under 1 KiB here) before the next compaction.
    expect(statSync(join(dir, JOURNAL_FILE)).size).toBeLessThanOrEqual(4096 + 1024);
    const again = Journal.open(dir);
    expect(again.pending().map((e) => e.seq)).toEqual([keep[0].seq]);
    expect(again.snapshot('cw-pump-2')).toEqual(snap(500));
  });

  it('drops the oldest pending events beyond its limit and counts them', () => {
    const j = Journal.open(tempDir(), { maxPending: 3 });
    for (const id of ['a', 'b', 'c', 'd', 'e']) j.appendEvents('x', [event(id)], null);
    expect(j.pending().map((e) => e.id)).toEqual(['c', 'd', 'e']);
    expect(j.pendingDropped).toBe(2);
  });

  it('opens an empty journal in a new directory', () => {
    const dir = join(tempDir(), 'nested', 'state');
    const j = Journal.open(dir);
    expect(j.pending()).toEqual([]);
    expect(j.openReport.truncatedBytes).toBe(0);
    truncateSync(join(dir, JOURNAL_FILE), 0);
  });
});
