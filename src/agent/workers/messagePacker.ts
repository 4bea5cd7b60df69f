/**
 * Broker messages on their way to one worker. Their bytes are written into a ring of shared
 * memory (one SharedArrayBuffer per worker, made once), and a batch posts only small arrays:
 * per message a route number (asset and topic, sent once per worker), the wall-clock stamp,
 * and where its bytes lie in the ring. The ring's space is given back when the worker answers
 * the batch (answers come in the order of the batches).
 *
 * Why shared memory: mqtt.js payloads are views into larger buffers, and posting a view clones
 * its whole backing buffer; copying each batch into a fresh buffer and transferring it was
 * measured in `npm run bench:live` (V8 profile of the agent's thread) at about a quarter of
 * that thread for the packing, and with garbage collection at 24 to 43 % (every buffer that
 * arrives or is allocated counts as new external memory, which drives V8 to collect). A ring
 * allocates nothing per message on either side.
 *
 * Each message lies in the ring at its own byte offset modulo 8 (mqtt.js payloads start at any
 * offset), and is copied out to the same offset modulo 8: V8 copies to or from shared memory a
 * word at a time only when both sides agree modulo 8, and a byte at a time otherwise. Placed
 * end to end, 10 kB blocks after a speed record of odd length all disagreed: the copy in took
 * about 3 to 6 us a block instead of 2.7 (cold source, `npm run bench:workers`), and a V8 byte
 * copy (`relaxed_memmove`) was two thirds of the agent's thread (one worker) in a perf profile.
 *
 * A message that does not fit in the ring's free space (a block far larger than usual, or a
 * worker far behind) travels in a buffer of its own, transferred.
 */

/** Ring size per worker: 64 messages in flight of up to 128 KiB each. */
export const RING_BYTES = 8 * 1024 * 1024;

export interface PackedMessages {
  op: 'messages';
  routes: Int32Array;
  nowMs: Float64Array;
  /** Where each message's bytes start in the ring; -1 - i: in `spill[i]` instead. */
  starts: Int32Array;
  lengths: Int32Array;
  spill: ArrayBuffer[];
}

export class MessagePacker {
  readonly ring: SharedArrayBuffer;
  private readonly size: number;
  private readonly bytes: Uint8Array;
  private routes: number[] = [];
  private nowMs: number[] = [];
  private starts: number[] = [];
  private lengths: number[] = [];
  private spill: ArrayBuffer[] = [];
  /** Next write position, and the start of the oldest bytes the worker may still read. */
  private head = 0;
  private tail = 0;
  /** Ring bytes written and not yet given back (to tell a full ring from an empty one). */
  private inUse = 0;
  /** Per batch posted and not yet answered: the head after it, and the bytes it holds. */
  private readonly posted: Array<{ end: number; bytes: number }> = [];
  private batchBytes = 0;

  /** `ringBytes`: RING_BYTES; tests take a small ring to reach its edges often. */
  constructor(ringBytes = RING_BYTES) {
    this.size = ringBytes;
    this.ring = new SharedArrayBuffer(ringBytes);
    this.bytes = new Uint8Array(this.ring);
  }

  get count(): number {
    return this.routes.length;
  }

  add(route: number, payload: Uint8Array, nowMs: number): void {
    const n = payload.byteLength;
    const at = this.place(n, payload.byteOffset & 7);
    if (at >= 0) {
      this.bytes.set(payload, at);
      this.starts.push(at);
    } else {
      const own = new ArrayBuffer(n);
      new Uint8Array(own).set(payload);
      this.starts.push(-1 - this.spill.length);
      this.spill.push(own);
    }
    this.lengths.push(n);
    this.routes.push(route);
    this.nowMs.push(nowMs);
  }

  /** The batch so far, with what to transfer, and a fresh one begun. */
  take(): { packed: PackedMessages; transfer: ArrayBuffer[] } {
    const packed: PackedMessages = {
      op: 'messages',
      routes: Int32Array.from(this.routes),
      nowMs: Float64Array.from(this.nowMs),
      starts: Int32Array.from(this.starts),
      lengths: Int32Array.from(this.lengths),
      spill: this.spill,
    };
    this.posted.push({ end: this.head, bytes: this.batchBytes });
    this.batchBytes = 0;
    this.routes = [];
    this.nowMs = [];
    this.starts = [];
    this.lengths = [];
    this.spill = [];
    const transfer = [packed.routes.buffer, packed.nowMs.buffer, packed.starts.buffer, packed.lengths.buffer, ...packed.spill] as ArrayBuffer[];
    return { packed, transfer };
  }

  /** The worker answered the oldest batch posted: its ring space is free again. */
  answered(): void {
    const b = this.posted.shift();
    if (!b) return;
    this.inUse -= b.bytes;
    this.tail = b.end;
    if (this.inUse === 0) {
      // Empty: start again at the ring's beginning. Batches still posted hold no ring bytes
      // (all their messages travelled in buffers of their own), and their ends, from before,
      // would move the tail past what comes next when answered: they end at the new start.
      this.head = this.tail = 0;
      for (const p of this.posted) p.end = 0;
    }
  }

  /**
   * Where `n` bytes go in the ring, or -1 when they do not fit: at the first place whose offset
   * is `phase` modulo 8 (the payload's own), so that the copy in and the copy out run a word at
   * a time (see the file's head).
   */
  private place(n: number, phase: number): number {
    const aligned = this.head + ((phase - this.head) & 7);
    let at = -1;
    if (this.inUse === 0) at = phase + n <= this.size ? phase : -1;
    else if (this.head > this.tail) at = aligned + n <= this.size ? aligned : phase + n <= this.tail ? phase : -1;
    else if (this.head < this.tail) at = aligned + n <= this.tail ? aligned : -1;
    if (at < 0) return -1;
    // A wrap leaves the bytes from the old head to the end unused, and padding before `at` is
    // unused too: they count as held until freed.
    const used = at >= this.head ? at + n - this.head : this.size - this.head + at + n;
    this.head = at + n;
    this.inUse += used;
    this.batchBytes += used;
    return at;
  }
}

/**
 * Calls `each` with every message of a batch, in order. The bytes are copied out of the ring
 * into `scratch` (grown as needed; returned) at the same offset modulo 8 (a word-wise copy), so
 * the runtime reads memory that is not shared and the ring's space can be reused at once:
 * nothing the runtime keeps refers to a payload.
 */
export function unpackMessages(ring: SharedArrayBuffer, p: PackedMessages, scratch: Uint8Array, each: (route: number, payload: Uint8Array, nowMs: number) => void): Uint8Array {
  const shared = new Uint8Array(ring);
  for (let i = 0; i < p.routes.length; i++) {
    const n = p.lengths[i];
    const start = p.starts[i];
    let payload: Uint8Array;
    if (start < 0) payload = new Uint8Array(p.spill[-1 - start]);
    else {
      const off = start & 7;
      if (scratch.byteLength < off + n) scratch = new Uint8Array(Math.max(off + n, 2 * scratch.byteLength));
      scratch.set(shared.subarray(start, start + n), off);
      payload = scratch.subarray(off, off + n);
    }
    each(p.routes[i], payload, p.nowMs[i]);
  }
  return scratch;
}
