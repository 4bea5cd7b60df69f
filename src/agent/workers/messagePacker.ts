/**
 * Broker messages on their way to one worker, packed: their bytes copied one after the other
 * into one ArrayBuffer (transferred, not cloned), and per message a route number (asset and
 * topic, sent once per worker), the wall-clock stamp and where its bytes end. One structured
 * clone of four arrays per batch instead of an object per message: the agent's thread spends
 * a few microseconds per message routing it (measured by `npm run bench:workers`).
 *
 * mqtt.js payloads are views into larger buffers: sending a view would copy its whole backing
 * buffer, so only the payload's own bytes are copied.
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

export class MessagePacker {
  private routes: number[] = [];
  private nowMs: number[] = [];
  private ends: number[] = [];
  private bytes = new Uint8Array(MIN_BYTES);
  private used = 0;

  get count(): number {
    return this.routes.length;
  }

  add(route: number, payload: Uint8Array, nowMs: number): void {
    const need = this.used + payload.byteLength;
    if (need > this.bytes.byteLength) {
      const grown = new Uint8Array(Math.max(need, 2 * this.bytes.byteLength));
      grown.set(this.bytes.subarray(0, this.used));
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
    // The next batch's buffer sized like this one's bytes (batches of one socket read are alike).
    this.bytes = new Uint8Array(Math.max(MIN_BYTES, 2 ** Math.ceil(Math.log2(this.used + 1))));
    this.used = 0;
    this.routes = [];
    this.nowMs = [];
    this.ends = [];
    return { packed, transfer: [packed.routes.buffer, packed.nowMs.buffer, packed.ends.buffer, packed.bytes] as ArrayBuffer[] };
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
