import type { FileHandle } from 'node:fs/promises';
import { describe, expect, it } from 'vitest';
import { ReadAhead, type ReadAheadLayout } from '../src/acquisition/readAhead.ts';

/** A file of `size` bytes (byte i holds i % 251) behind a FileHandle-like reader that records its reads. */
function fakeFile(size: number, opts: { maxPerRead?: number; failAt?: number; shortBy?: number } = {}) {
  const calls: { position: number; length: number }[] = [];
  const resolvers: (() => void)[] = [];
  let held = false;
  const fh = {
    read(buffer: Uint8Array, offset: number, length: number, position: number) {
      calls.push({ position, length });
      const n = Math.max(0, Math.min(length, opts.maxPerRead ?? length, size - (opts.shortBy ?? 0) - position));
      for (let i = 0; i < n; i++) buffer[offset + i] = (position + i) % 251;
      const answer = () => (opts.failAt !== undefined && position >= opts.failAt ? Promise.reject(new Error(`disk error at ${position}`)) : Promise.resolve({ bytesRead: n, buffer }));
      if (!held) return answer();
      return new Promise((resolve, reject) => resolvers.push(() => answer().then(resolve, reject)));
    },
  };
  return {
    fh: fh as unknown as FileHandle,
    calls,
    hold: () => (held = true),
    release: () => {
      held = false;
      for (const r of resolvers.splice(0)) r();
    },
  };
}

const slots = (bytes: number) => [{ bytes: new Uint8Array(bytes + 8) }, { bytes: new Uint8Array(bytes + 8) }] as const;

function layout(frames: number, framesPerRead: number, extra: Partial<ReadAheadLayout<{ bytes: Uint8Array }>> = {}): ReadAheadLayout<{ bytes: Uint8Array }> {
  return {
    dataOffset: 44,
    blockAlign: 4,
    frames,
    framesPerRead,
    leadOf: (position) => position % 8,
    truncated: (position, frame) => new Error(`ended at ${position} in frame ${frame}`),
    ...extra,
  };
}

describe('ReadAhead: a file read in order, one chunk ahead', () => {
  it('gives every chunk its own bytes at its lead, and has the next read under way when a chunk is handed out', async () => {
    const file = fakeFile(44 + 4 * 1000);
    const reader = new ReadAhead(file.fh, slots(4 * 64), layout(1000, 64));
    for (let frame = 0; frame < 1000; ) {
      const chunk = await reader.chunkAt(frame);
      expect(chunk.frame).toBe(frame);
      expect(chunk.count).toBe(Math.min(64, 1000 - frame));
      const position = 44 + frame * 4;
      expect(chunk.lead).toBe(position % 8);
      const got = chunk.slot.bytes.subarray(chunk.lead, chunk.lead + chunk.count * 4);
      expect(Array.from(got)).toEqual(Array.from({ length: chunk.count * 4 }, (_, i) => (position + i) % 251));
      // The read of the chunk after this one was issued before this one came back to us.
      const next = frame + chunk.count;
      expect(file.calls.some((c) => c.position === 44 + next * 4)).toBe(next < 1000);
      frame = next;
    }
    expect(file.calls).toHaveLength(Math.ceil(1000 / 64));
  });

  it('alternates the two slots, so the chunk in hand is never overwritten by the read ahead', async () => {
    const file = fakeFile(44 + 4 * 300);
    const s = slots(4 * 100);
    const reader = new ReadAhead(file.fh, s, layout(300, 100));
    const a = await reader.chunkAt(0);
    const b = await reader.chunkAt(100);
    const c = await reader.chunkAt(200);
    expect(a.slot).toBe(s[0]);
    expect(b.slot).toBe(s[1]);
    expect(c.slot).toBe(s[0]);
  });

  it('keeps reading where the system returns fewer bytes than asked', async () => {
    const file = fakeFile(44 + 4 * 200, { maxPerRead: 7 });
    const reader = new ReadAhead(file.fh, slots(4 * 100), layout(200, 100));
    const second = (await reader.chunkAt(0), await reader.chunkAt(100));
    expect(second.slot.bytes[second.lead + 399]).toBe((44 + 799) % 251);
  });

  it('reports a file that ends early on the chunk it cuts short, naming where', async () => {
    const file = fakeFile(44 + 4 * 200, { shortBy: 10 });
    const reader = new ReadAhead(file.fh, slots(4 * 100), layout(200, 100));
    await reader.chunkAt(0);
    await expect(reader.chunkAt(100)).rejects.toThrow(/ended at 834 in frame 100/);
  });

  it('a read ahead that fails is reported when its chunk is asked for, and dropped quietly by settle()', async () => {
    const unhandled: unknown[] = [];
    const onUnhandled = (e: unknown) => unhandled.push(e);
    process.on('unhandledRejection', onUnhandled);
    try {
      const failing = fakeFile(44 + 4 * 300, { failAt: 44 + 4 * 100 });
      const reader = new ReadAhead(failing.fh, slots(4 * 100), layout(300, 100));
      await reader.chunkAt(0);
      await new Promise((r) => setTimeout(r, 20)); // the failed read ahead sits unobserved for a while
      await expect(reader.chunkAt(100)).rejects.toThrow(/disk error at 444/);

      const stopped = fakeFile(44 + 4 * 300, { failAt: 44 + 4 * 100 });
      const early = new ReadAhead(stopped.fh, slots(4 * 100), layout(300, 100));
      await early.chunkAt(0);
      await early.settle();
      await new Promise((r) => setTimeout(r, 20));
      expect(unhandled).toEqual([]);
    } finally {
      process.off('unhandledRejection', onUnhandled);
    }
  });

  it('settle() waits for the read in flight, so its slot can be handed on', async () => {
    const file = fakeFile(44 + 4 * 300);
    const reader = new ReadAhead(file.fh, slots(4 * 100), layout(300, 100));
    await reader.chunkAt(0);
    file.hold();
    await reader.chunkAt(100); // issues the read of frame 200, which is held
    let settled = false;
    const done = reader.settle().then(() => (settled = true));
    await new Promise((r) => setTimeout(r, 10));
    expect(settled).toBe(false);
    file.release();
    await done;
    expect(settled).toBe(true);
  });
});
