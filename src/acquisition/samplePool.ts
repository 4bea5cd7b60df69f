/**
 * Sample arrays for decoded blocks, given back once the engine has consumed a block, so the live
 * agent does not make a fresh array per block (about 10 kB each at 25.6 kHz and 0.1 s: at
 * hundreds of channels that is tens of MB a second of short-lived memory outside the JavaScript
 * heap, which a profile of the live agent showed as garbage collection).
 *
 * An array is given back only after every consumer is done with it: the engine copies what it
 * keeps (spectrum frames, decimated samples, speed paths) and holds no reference to a block's
 * array. In order, one array per block length is enough; blocks held for reordering keep theirs
 * until delivered.
 */
const MAX_KEPT = 16;

export class SamplePool {
  private readonly free = new Map<number, Float32Array[]>();

  /** An array of `count` samples, contents unspecified (the decoder overwrites them all). */
  take = (count: number): Float32Array => this.free.get(count)?.pop() ?? new Float32Array(count);

  give(samples: Float32Array): void {
    let list = this.free.get(samples.length);
    if (list === undefined) {
      if (this.free.size >= MAX_KEPT) return;
      this.free.set(samples.length, (list = []));
    }
    if (list.length < MAX_KEPT) list.push(samples);
  }
}
