/**
 * A file's frames read in order, a chunk at a time, one chunk ahead: while the caller decodes
 * chunk k out of one slot, chunk k + 1 is being read into the other (the thread pool does the
 * copy out of the file cache), so a reader that decodes and processes between reads does not sit
 * idle waiting on each one. Each slot is written only by its own read and read only once that
 * read has finished; the caller is done with a slot when it asks for the chunk after the one in it.
 */
import type { FileHandle } from 'node:fs/promises';

/** Where a chunk is read to: `bytes` holds a lead of up to `leadOf`'s largest answer, then the frames. */
export interface ReadSlot {
  readonly bytes: Uint8Array;
}

/** One chunk: frames [frame, frame + count) of the data, from byte `lead` of `slot.bytes` on. */
export interface ReadChunk<S extends ReadSlot> {
  readonly slot: S;
  readonly frame: number;
  readonly count: number;
  readonly lead: number;
}

export interface ReadAheadLayout<S extends ReadSlot> {
  /** Byte where frame 0 starts in the file. */
  dataOffset: number;
  blockAlign: number;
  frames: number;
  /** Frames per chunk (the last may have fewer). */
  framesPerRead: number;
  /** Bytes before the chunk's first frame in `slot`, from the chunk's file position. */
  leadOf(position: number, slot: S): number;
  /** The error for a file that ended early (it was truncated while being read). */
  truncated(position: number, frame: number): Error;
}

interface InFlight<S extends ReadSlot> {
  chunk: ReadChunk<S>;
  done: Promise<void>;
}

export class ReadAhead<S extends ReadSlot> {
  private pending: InFlight<S> | null = null;
  private turn = 0;

  constructor(
    private readonly fh: FileHandle,
    private readonly slots: readonly [S, S],
    private readonly layout: ReadAheadLayout<S>,
  ) {}

  /** The chunk that starts at `frame`, once read; the read of the chunk after it starts at once. */
  async chunkAt(frame: number): Promise<ReadChunk<S>> {
    let read = this.pending;
    this.pending = null;
    if (read === null || read.chunk.frame !== frame) {
      if (read !== null) await read.done.catch(() => undefined);
      read = this.start(frame);
    }
    await read.done;
    const after = frame + read.chunk.count;
    if (after < this.layout.frames) this.pending = this.start(after);
    return read.chunk;
  }

  /** Waits for a read still in flight (whether it fails no longer matters); then the slots are free. */
  async settle(): Promise<void> {
    const read = this.pending;
    this.pending = null;
    if (read !== null) await read.done.catch(() => undefined);
  }

  private start(frame: number): InFlight<S> {
    const { dataOffset, blockAlign, frames, framesPerRead } = this.layout;
    const slot = this.slots[this.turn];
    this.turn ^= 1;
    const count = Math.min(framesPerRead, frames - frame);
    const position = dataOffset + frame * blockAlign;
    const lead = this.layout.leadOf(position, slot);
    const done = this.fill(slot.bytes, lead, count * blockAlign, position, frame);
    // Failures are seen when the chunk is asked for, or dropped by settle(); never unhandled.
    done.catch(() => undefined);
    return { chunk: { slot, frame, count, lead }, done };
  }

  private async fill(bytes: Uint8Array, lead: number, want: number, position: number, frame: number): Promise<void> {
    let got = 0;
    while (got < want) {
      const { bytesRead } = await this.fh.read(bytes, lead + got, want - got, position + got);
      if (bytesRead === 0) throw this.layout.truncated(position + got, frame);
      got += bytesRead;
    }
  }
}
