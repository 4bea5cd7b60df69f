/**
 * The agent's durable local journal: alarm events before they are published, and the state the
 * agent needs to carry on after a restart (kill -9 included).
 *
 * One append-only file, `<state dir>/journal.log`, one record per line:
 *
 *     <crc32 of the JSON, 8 hex digits> <JSON>\n
 *
 *   {"op":"events","events":[{"seq","id","topic","payload"}...],"asset","snapshot"}
 *       alarm or operator events of one asset and that asset's state right after them, in one
 *       line, so the events and the state that produced them are durable together;
 *   {"op":"snapshot","asset","snapshot"}        periodic state of an asset;
 *   {"op":"acked","seqs":[...]}                 the broker acknowledged these events (PUBACK).
 *
 * Every events or snapshot line is written and flushed to disk (fsync) before anything is
 * published, so an event is either in the journal or was never produced. An event stays
 * pending until its PUBACK is journaled; after an outage or a restart pending events are
 * published again, in order, with their original ids (consumers drop duplicates by id).
 *
 * Torn writes: a power cut can leave the last line half written. On opening, the first line
 * that is incomplete or fails its checksum ends the journal: the file is cut there (and the
 * cut is reported). Bounded: when the file grows past `maxBytes`, it is rewritten with only the
 * pending events and the latest snapshot of each asset (written to a temporary file, flushed,
 * then renamed over the old one: the journal is never half compacted). Pending events beyond
 * `maxPending` (a broker gone for days during an alarm storm) are dropped oldest first and
 * counted.
 */
import { closeSync, fsyncSync, mkdirSync, openSync, readFileSync, renameSync, writeSync, existsSync, statSync, ftruncateSync } from 'node:fs';
import { join } from 'node:path';
import { crc32 } from 'node:zlib';
import type { RuntimeSnapshot } from './assetRuntime.ts';

export interface JournalEvent {
  seq: number;
  id: string;
  topic: string;
  payload: string;
}

export interface JournalOpenReport {
  /** Bytes cut from the end of a torn or corrupt journal (0 when it was clean). */
  truncatedBytes: number;
  pending: number;
  snapshots: string[];
}

type Line =
  | { op: 'events'; events: JournalEvent[]; asset: string; snapshot: RuntimeSnapshot | null }
  | { op: 'snapshot'; asset: string; snapshot: RuntimeSnapshot }
  | { op: 'acked'; seqs: number[] };

export const JOURNAL_FILE = 'journal.log';
export const DEFAULT_MAX_JOURNAL_BYTES = 4 * 1024 * 1024;
export const DEFAULT_MAX_PENDING = 10_000;

export class Journal {
  readonly path: string;
  readonly openReport: JournalOpenReport;
  private readonly dir: string;
  private readonly maxBytes: number;
  private readonly maxPending: number;
  private fd: number;
  private bytes: number;
  private nextSeq = 1;
  private readonly pendingEvents = new Map<number, JournalEvent>();
  private readonly snapshots = new Map<string, RuntimeSnapshot>();
  private droppedPending = 0;

  private constructor(dir: string, maxBytes: number, maxPending: number) {
    this.dir = dir;
    this.path = join(dir, JOURNAL_FILE);
    this.maxBytes = maxBytes;
    this.maxPending = maxPending;
    mkdirSync(dir, { recursive: true });
    const truncatedBytes = this.load();
    this.fd = openSync(this.path, 'a');
    this.bytes = statSync(this.path).size;
    this.openReport = { truncatedBytes, pending: this.pendingEvents.size, snapshots: [...this.snapshots.keys()] };
  }

  static open(dir: string, opts: { maxBytes?: number; maxPending?: number } = {}): Journal {
    return new Journal(dir, opts.maxBytes ?? DEFAULT_MAX_JOURNAL_BYTES, opts.maxPending ?? DEFAULT_MAX_PENDING);
  }

  /** Events not yet acknowledged by the broker, oldest first. */
  pending(): JournalEvent[] {
    return [...this.pendingEvents.values()];
  }

  snapshot(asset: string): RuntimeSnapshot | undefined {
    return this.snapshots.get(asset);
  }

  get pendingDropped(): number {
    return this.droppedPending;
  }

  /** Makes events (and the asset's state after them) durable; returns them with their seqs. */
  appendEvents(asset: string, events: Array<{ id: string; topic: string; payload: string }>, snapshot: RuntimeSnapshot | null): JournalEvent[] {
    const numbered = events.map((e) => ({ seq: this.nextSeq++, ...e }));
    this.write({ op: 'events', events: numbered, asset, snapshot }, true);
    for (const e of numbered) this.pendingEvents.set(e.seq, e);
    if (snapshot) this.snapshots.set(asset, snapshot);
    this.bound();
    return numbered;
  }

  appendSnapshot(asset: string, snapshot: RuntimeSnapshot): void {
    this.write({ op: 'snapshot', asset, snapshot }, true);
    this.snapshots.set(asset, snapshot);
    this.bound();
  }

  /**
   * The broker has the events. Not flushed at once: losing an acknowledgement to a crash only
   * means the event is published once more, with the same id.
   */
  acknowledge(seqs: number[]): void {
    const known = seqs.filter((s) => this.pendingEvents.delete(s));
    if (known.length === 0) return;
    this.write({ op: 'acked', seqs: known }, false);
    this.bound();
  }

  close(): void {
    fsyncSync(this.fd);
    closeSync(this.fd);
  }

  private write(line: Line, flush: boolean): void {
    const text = encodeLine(line);
    writeSync(this.fd, text);
    if (flush) fsyncSync(this.fd);
    this.bytes += Buffer.byteLength(text);
  }

  private bound(): void {
    while (this.pendingEvents.size > this.maxPending) {
      const oldest = this.pendingEvents.keys().next().value as number;
      this.pendingEvents.delete(oldest);
      this.droppedPending++;
    }
    if (this.bytes > this.maxBytes) this.compact();
  }

  /** Rewrites the journal with only what is still needed; atomic by rename. */
  compact(): void {
    const tmp = `${this.path}.compact`;
    const fd = openSync(tmp, 'w');
    let text = '';
    for (const [asset, snapshot] of this.snapshots) text += encodeLine({ op: 'snapshot', asset, snapshot });
    const pending = this.pending();
    if (pending.length > 0) text += encodeLine({ op: 'events', events: pending, asset: '', snapshot: null });
    writeSync(fd, text);
    fsyncSync(fd);
    closeSync(fd);
    fsyncSync(this.fd);
    closeSync(this.fd);
    renameSync(tmp, this.path);
    syncDir(this.dir);
    this.fd = openSync(this.path, 'a');
    this.bytes = Buffer.byteLength(text);
  }

  /** Reads the journal; returns how many bytes of a torn or corrupt tail were cut. */
  private load(): number {
    if (!existsSync(this.path)) return 0;
    const buf = readFileSync(this.path);
    let offset = 0;
    while (offset < buf.length) {
      const end = buf.indexOf(0x0a, offset);
      if (end < 0) break;
      const line = decodeLine(buf.subarray(offset, end));
      if (!line) break;
      this.apply(line);
      offset = end + 1;
    }
    if (offset < buf.length) {
      const fd = openSync(this.path, 'r+');
      ftruncateSync(fd, offset);
      fsyncSync(fd);
      closeSync(fd);
    }
    return buf.length - offset;
  }

  private apply(line: Line): void {
    if (line.op === 'events') {
      for (const e of line.events) {
        this.pendingEvents.set(e.seq, e);
        this.nextSeq = Math.max(this.nextSeq, e.seq + 1);
      }
      if (line.snapshot && line.asset) this.snapshots.set(line.asset, line.snapshot);
    } else if (line.op === 'snapshot') {
      this.snapshots.set(line.asset, line.snapshot);
    } else {
      for (const s of line.seqs) this.pendingEvents.delete(s);
    }
  }
}

export function encodeLine(line: Line): string {
  const json = JSON.stringify(line);
  return `${crc32(json).toString(16).padStart(8, '0')} ${json}\n`;
}

/** Null for a line that is malformed or fails its checksum. */
export function decodeLine(bytes: Uint8Array): Line | null {
  const text = Buffer.from(bytes.buffer, bytes.byteOffset, bytes.length).toString('utf8');
  if (text.length < 10 || text[8] !== ' ') return null;
  const json = text.slice(9);
  if (crc32(json).toString(16).padStart(8, '0') !== text.slice(0, 8)) return null;
  try {
    return JSON.parse(json) as Line;
  } catch {
    return null;
  }
}

function syncDir(dir: string): void {
  try {
    const fd = openSync(dir, 'r');
    fsyncSync(fd);
    closeSync(fd);
  } catch {
    // Some file systems refuse to fsync a directory; the rename itself is still atomic.
  }
}
