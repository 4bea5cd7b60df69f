/**
 * A queue of doubles that grows at the back and is dropped from the front, in one typed array:
 * no per-sample allocation and nothing for the garbage collector (the capture keeps a few
 * seconds of decimated samples and their demodulation products this way).
 */
export class FloatQueue {
  private data: Float64Array;
  private start = 0;
  private end = 0;

  constructor(capacity = 4096) {
    this.data = new Float64Array(capacity);
  }

  get length(): number {
    return this.end - this.start;
  }

  /** Doubles the array has room for (what the queue holds in memory). */
  get capacity(): number {
    return this.data.length;
  }

  push(v: number): void {
    if (this.end === this.data.length) this.makeRoom();
    this.data[this.end++] = v;
  }

  /**
   * Appends `n` slots for the caller to fill in `array` from the index returned, for loops that
   * write a run of values at once. The array grows (or its values slide) exactly as it would
   * for `n` pushes, so memory does not depend on which way the values arrive.
   */
  extend(n: number): number {
    while (this.end + n > this.data.length) this.makeRoom();
    const at = this.end;
    this.end += n;
    return at;
  }

  /** The array behind the queue (replaced when it grows: read it after `extend`). */
  get array(): Float64Array {
    return this.data;
  }

  /** Index in `array` of the front value. */
  get offset(): number {
    return this.start;
  }

  /** The value at index `i` from the front (no bounds check: callers index what they pushed). */
  at(i: number): number {
    return this.data[this.start + i];
  }

  /** The underlying array and the offset of the front, for tight loops. */
  view(): { data: Float64Array; offset: number } {
    return { data: this.data, offset: this.start };
  }

  dropFront(n: number): void {
    this.start = Math.min(this.end, this.start + n);
  }

  clear(): void {
    this.start = 0;
    this.end = 0;
  }

  /**
   * Gives memory back after a long spell (a sweep's rows, samples that waited on a late speed):
   * when the queue holds a quarter of its array or less, its values move to a fresh array of
   * twice what it holds (at least `floor`).
   */
  shrink(floor: number): void {
    const used = this.end - this.start;
    const target = Math.max(1, floor, 2 * used);
    if (this.data.length < 2 * target) return;
    const smaller = new Float64Array(target);
    smaller.set(this.data.subarray(this.start, this.end));
    this.data = smaller;
    this.start = 0;
    this.end = used;
  }

  /** Empties the queue into a fresh array of `capacity` (sized to what its user will hold). */
  reset(capacity: number): void {
    this.clear();
    if (this.data.length !== capacity) this.data = new Float64Array(Math.max(1, capacity));
  }

  private makeRoom(): void {
    const used = this.end - this.start;
    // Slide to the front when at least a third is free (each slide then buys room for a third
    // of the array: at most two copies per value pushed); otherwise grow by half. The array
    // stays within 1.5 times of the most the queue ever held, where doubling on half-free kept
    // up to three times (64 sensors of the soak map: 24 MiB held for 7.8 MiB of values).
    if (this.start >= this.data.length / 3) {
      this.data.copyWithin(0, this.start, this.end);
    } else {
      const bigger = new Float64Array(Math.ceil(this.data.length * 1.5));
      bigger.set(this.data.subarray(this.start, this.end));
      this.data = bigger;
    }
    this.start = 0;
    this.end = used;
  }
}
