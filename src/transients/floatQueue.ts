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

  push(v: number): void {
    if (this.end === this.data.length) this.makeRoom();
    this.data[this.end++] = v;
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

  private makeRoom(): void {
    const used = this.end - this.start;
    // Slide to the front when at least half is free; otherwise double.
    if (this.start >= this.data.length / 2) {
      this.data.copyWithin(0, this.start, this.end);
    } else {
      const bigger = new Float64Array(this.data.length * 2);
      bigger.set(this.data.subarray(this.start, this.end));
      this.data = bigger;
    }
    this.start = 0;
    this.end = used;
  }
}
