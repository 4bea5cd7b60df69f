/**
 * The ring the pool packs messages into (src/agent/workers/messagePacker.ts): every message
 * comes out byte for byte whatever its size, through wraps of the ring, a ring too full to take
 * one (it travels in a buffer of its own), and space given back as batches are answered,
 * also when a batch wholly in buffers of its own is still posted as the ring empties.
 */
import { describe, expect, it } from 'vitest';
import { MessagePacker, RING_BYTES, unpackMessages, type PackedMessages } from '../src/agent/workers/messagePacker.ts';

/**
 * Message i: `n` bytes that no other message of the run has in that order, as a view starting
 * `i % 13` bytes into a larger buffer (as mqtt.js hands payloads over: any byte offset).
 */
function message(i: number, n: number): Uint8Array {
  const b = new Uint8Array(n + 13).subarray(i % 13, i % 13 + n);
  for (let j = 0; j < n; j++) b[j] = (i * 31 + j * 7 + (j >> 8)) & 255;
  return b;
}

describe('the message ring', () => {
  for (const [ringBytes, big, small, behind] of [
    [RING_BYTES, 1_000_000, 20_000, 10],
    // A small ring, so that its edges (exact fits, wraps, a full ring) come up all the time.
    [1000, 300, 120, 6],
  ] as const) {
  it(`gives every message back byte for byte through wraps, spills and freed space (ring of ${ringBytes} bytes)`, () => {
    const packer = new MessagePacker(ringBytes);
    const inFlight: Array<{ packed: PackedMessages; ids: number[] }> = [];
    let scratch: Uint8Array = new Uint8Array(16);
    let spilled = 0;
    let wrapped = 0;
    let lastStart = -1;
    const sizes = new Map<number, number>();
    // A worker that handles the oldest batch and answers it.
    const answerOldest = () => {
      const b = inFlight.shift();
      if (!b) return;
      let k = 0;
      scratch = unpackMessages(packer.ring, b.packed, scratch, (route, payload, nowMs) => {
        const id = b.ids[k++];
        expect(route).toBe(id % 5);
        expect(nowMs).toBe(id * 100);
        expect(payload.byteLength).toBe(sizes.get(id));
        expect(Buffer.compare(Buffer.from(payload), Buffer.from(message(id, sizes.get(id) as number)))).toBe(0);
        // Handed over at the sender's offset modulo 8, so both copies can run a word at a time.
        if (b.packed.starts[k - 1] >= 0) expect(payload.byteOffset % 8).toBe((id % 13) % 8);
      });
      packer.answered();
    };
    let ids: number[] = [];
    for (let id = 0; id < 4000; id++) {
      // Mostly blocks of a few kB, every seventh one of 1 to 3 MiB (a few fill the 8 MiB ring).
      const n = id % 7 === 5 ? big + ((id * 7919) % (2 * big)) : 1 + ((id * 104729) % small);
      sizes.set(id, n);
      packer.add(id % 5, message(id, n), id * 100);
      ids.push(id);
      if (ids.length === 4) {
        const { packed } = packer.take();
        // No two messages the worker may still read share a byte of the ring.
        const live = inFlight.flatMap((b) => [...b.packed.starts].map((s, i) => [s, s + b.packed.lengths[i]]).filter(([s]) => s >= 0));
        for (let i = 0; i < packed.starts.length; i++) {
          const [a, z] = [packed.starts[i], packed.starts[i] + packed.lengths[i]];
          if (a < 0) continue;
          expect(z).toBeLessThanOrEqual(ringBytes);
          // Placed at the payload's own offset modulo 8 (message(id) starts id % 13 bytes in).
          expect(a % 8).toBe((ids[i] % 13) % 8);
          const clash = live.find(([b, y]) => a < y && b < z);
          expect(clash, `message ${ids[i]} at ${a}..${z} overlaps ${clash}`).toBeUndefined();
          live.push([a, z]);
        }
        for (const s of packed.starts) {
          if (s < 0) spilled++;
          else if (s < lastStart) wrapped++;
          if (s >= 0) lastStart = s;
        }
        inFlight.push({ packed, ids });
        ids = [];
        // The worker runs up to ten batches behind.
        if (inFlight.length > behind) answerOldest();
      }
    }
    while (inFlight.length > 0) answerOldest();
    // The run must have wrapped the ring and overflowed it, or it proves little.
    expect(wrapped).toBeGreaterThan(3);
    expect(spilled).toBeGreaterThan(0);
    // Everything answered: the next message starts at the ring's beginning again.
    packer.add(0, message(0, 10), 0);
    expect(packer.take().packed.starts[0]).toBe(0);
    expect(RING_BYTES).toBeGreaterThan(64 * 10_000);
  });
  }
});

describe('the message ring after a batch that went wholly outside it', () => {
  it('keeps the bytes of later batches while such a batch waits behind an emptied ring', () => {
    const packer = new MessagePacker(1000);
    const bytes = (n: number, v: number) => new Uint8Array(n).fill(v);
    // A: 900 bytes in the ring. B: one message too large for what is left, in a buffer of its own.
    packer.add(0, bytes(900, 1), 0);
    const a = packer.take().packed;
    packer.add(0, bytes(500, 2), 0);
    const b = packer.take().packed;
    expect(b.starts[0]).toBeLessThan(0);
    // The worker answers A: nothing of the ring is held any more, B still waits.
    packer.answered();
    // C and D go into the emptied ring, then B is answered; C and D are not.
    packer.add(0, bytes(500, 3), 0);
    const c = packer.take().packed;
    packer.add(0, bytes(440, 4), 0);
    const d = packer.take().packed;
    packer.answered();
    // E must not land on C's or D's bytes, which the worker has still to read.
    packer.add(0, bytes(400, 5), 0);
    const e = packer.take().packed;
    const live = [c, d].map((p) => [p.starts[0], p.starts[0] + p.lengths[0]]);
    const [s, z] = [e.starts[0], e.starts[0] + e.lengths[0]];
    if (s >= 0) for (const [from, to] of live) expect(s < to && from < z, `E at ${s}..${z} overlaps ${from}..${to}`).toBe(false);
    // And C's bytes come out as they went in.
    let got: Uint8Array | null = null;
    unpackMessages(packer.ring, c, new Uint8Array(16), (_r, payload) => (got = Uint8Array.from(payload)));
    expect(Buffer.compare(Buffer.from(got as unknown as Uint8Array), Buffer.from(bytes(500, 3)))).toBe(0);
    expect(a.starts[0]).toBe(0);
  });
  // Rings of 64 to 2064 bytes, messages of 0 to 1.2 rings at any offset, batches of any count
  // (some wholly in buffers of their own), answered at random: no message the worker may still
  // read is written over, and each comes out as it went in (a seeded generator: the same run each time).
  it('keeps every live message through random adds, batches and answers on small rings', () => {
    let seed = 12345;
    const rnd = () => (seed = (seed * 1103515245 + 12345) & 0x7fffffff) / 0x7fffffff;
    for (let trial = 0; trial < 200; trial++) {
      const size = 64 + Math.floor(rnd() * 2000);
      const packer = new MessagePacker(size);
      const inFlight: Array<{ packed: PackedMessages; data: Uint8Array[] }> = [];
      let batch: Uint8Array[] = [];
      let scratch: Uint8Array = new Uint8Array(8);
      for (let step = 0, id = 0; step < 400; step++) {
        const r = rnd();
        if (r < 0.5) {
          const n = Math.floor(rnd() < 0.2 ? rnd() * size * 1.2 : rnd() * size * 0.3);
          const off = Math.floor(rnd() * 8);
          const payload = new Uint8Array(n + off).subarray(off);
          for (let j = 0; j < n; j++) payload[j] = (id * 7 + j) & 255;
          id++;
          packer.add(0, payload, 0);
          batch.push(Uint8Array.from(payload));
        } else if (r < 0.75 && packer.count > 0) {
          const { packed } = packer.take();
          const live: Array<[number, number]> = [];
          for (const b of inFlight) b.packed.starts.forEach((s, i) => s >= 0 && live.push([s, s + b.packed.lengths[i]]));
          packed.starts.forEach((s, i) => {
            if (s < 0) return;
            const z = s + packed.lengths[i];
            expect(z).toBeLessThanOrEqual(size);
            for (const [a, y] of live) if (s < y && a < z) expect.fail(`ring ${size}, step ${step}: ${s}..${z} written over ${a}..${y}`);
            live.push([s, z]);
          });
          inFlight.push({ packed, data: batch });
          batch = [];
        } else if (inFlight.length > 0) {
          const b = inFlight.shift() as { packed: PackedMessages; data: Uint8Array[] };
          let k = 0;
          scratch = unpackMessages(packer.ring, b.packed, scratch, (_route, payload) => {
            expect(Buffer.compare(Buffer.from(payload), Buffer.from(b.data[k++]))).toBe(0);
          });
          packer.answered();
        }
      }
    }
  });
});
