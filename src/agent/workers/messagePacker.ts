/**
 * Broker messages on their way to one worker, packed: their bytes copied one after the other
 * into one ArrayBuffer (transferred, not cloned), and per message a route number (asset and
 * topic, sent once per worker), the wall-clock stamp and where its bytes end. One structured
 * clone of four arrays per batch instead of an object per message: the agent's thread spends
 * a few microseconds per message routing it (measured by `npm run bench:workers`).
 *
 * mqtt.js payloads are views into larger buffers: sending a view would copy its whole backing
 * buffer, so only the payload's own bytes are copied.
 *
 * The worker hands each batch's byte buffer back with its answer (nothing keeps a view into it:
 * the runtime copies samples out and parses the rest), and the next batches are packed into
 * those buffers again: no fresh zeroed buffer per batch, whose pages the kernel would have to
 * map anew each time (measured: fresh buffers made packing about a quarter of the agent
 * thread's CPU in `npm run bench:live`).
 */

export interface PackedMessages {
  op: 'messages';
  routes: Int32Array;
  nowMs: Float64Array;
  /** End offset of each message's bytes in `bytes` (the first starts at 0). */
  ends: Uint32Array;
  bytes: ArrayBuffer;
}

const MIN_BYTES = 64 * 1024;
/** Buffers kept for reuse: a few batches in flight each way. */
const SPARE_BUFFERS = 8;

export class MessagePacker {
  private routes: number[] = [];
  private nowMs: number[] = [];
  private ends: number[] = [];
  private bytes: Uint8Array = new Uint8Array(MIN_BYTES);
  private used = 0;
  private readonly spare: ArrayBuffer[] = [];

  get count(): number {
    return this.routes.length;
  }

  add(route: number, payload: Uint8Array, nowMs: number): void {
    const need = this.used + payload.byteLength;
    if (need > this.bytes.byteLength) {
      const grown = this.buffer(Math.max(need, 2 * this.bytes.byteLength));
      grown.set(this.bytes.subarray(0, this.used));
      this.giveBack(this.bytes.buffer as ArrayBuffer);
      this.bytes = grown;
    }
    this.bytes.set(payload, this.used);
    this.used = need;
    this.routes.push(route);
    this.nowMs.push(nowMs);
    this.ends.push(need);
  }

  /** The batch so far (its arrays to be transferred), and a fresh one begun. */
  take(): { packed: PackedMessages; transfer: ArrayBuffer[] } {
    const packed: PackedMessages = {
      op: 'messages',
      routes: Int32Array.from(this.routes),
      nowMs: Float64Array.from(this.nowMs),
      ends: Uint32Array.from(this.ends),
      bytes: this.bytes.buffer as ArrayBuffer,
    };
    // The next batch's buffer at least as large as this one's bytes (batches are alike).
    this.bytes = this.buffer(Math.max(MIN_BYTES, 2 ** Math.ceil(Math.log2(this.used + 1))));
    this.used = 0;
    this.routes = [];
    this.nowMs = [];
    this.ends = [];
    return { packed, transfer: [packed.routes.buffer, packed.nowMs.buffer, packed.ends.buffer, packed.bytes] as ArrayBuffer[] };
  }

  /** A batch's byte buffer back from the worker, for reuse. */
  giveBack(buffer: ArrayBuffer): void {
    if (this.spare.length < SPARE_BUFFERS && buffer.byteLength > 0) this.spare.push(buffer);
  }

  /** A spare buffer of at least `bytes`, else a new one. */
  private buffer(bytes: number): Uint8Array {
    const i = this.spare.findIndex((b) => b.byteLength >= bytes);
    return i >= 0 ? new Uint8Array(this.spare.splice(i, 1)[0]) : new Uint8Array(bytes);
  }
}

/** Calls `each` with every message of a batch, in order, its bytes a view into the batch. */
export function unpackMessages(p: PackedMessages, each: (route: number, payload: Uint8Array, nowMs: number) => void): void {
  let start = 0;
  for (let i = 0; i < p.routes.length; i++) {
    const end = p.ends[i];
    each(p.routes[i], new Uint8Array(p.bytes, start, end - start), p.nowMs[i]);
    start = end;
  }
}
