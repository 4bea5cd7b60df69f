/**
 * Measuring steps of one kind (a sensor's order window, or one component's decay window) that
 * have fallen due and wait to be measured, oldest first. Each keeps what it was given when it
 * fell due: its centre, the samples it spans (counted from the capture's first sample, which
 * index 0 of the queues moves away from) and the time of its first sample, so that it is
 * measured on the same numbers whenever that happens.
 */
import { FloatQueue } from './floatQueue.ts';

/** Values per window: centre, first sample, end sample, time of the first sample. */
const STRIDE = 4;

export class DueWindows {
  private readonly q = new FloatQueue(STRIDE * 16);

  get length(): number {
    return this.q.length / STRIDE;
  }

  push(centreS: number, from: number, to: number, firstS: number): void {
    const at = this.q.extend(STRIDE);
    const a = this.q.array;
    a[at] = centreS;
    a[at + 1] = from;
    a[at + 2] = to;
    a[at + 3] = firstS;
  }

  /** The oldest window's centre (s); NaN with none. */
  get centreS(): number {
    return this.length > 0 ? this.q.at(0) : Number.NaN;
  }

  get from(): number {
    return this.q.at(1);
  }

  get to(): number {
    return this.q.at(2);
  }

  get firstS(): number {
    return this.q.at(3);
  }

  /** Drops the oldest window. */
  shift(): void {
    this.q.dropFront(STRIDE);
  }

  /** Drops the windows centred before `centreS` (they are in order of their centres). */
  dropBefore(centreS: number): void {
    while (this.length > 0 && this.q.at(0) < centreS) this.q.dropFront(STRIDE);
  }

  clear(): void {
    this.q.clear();
  }
}
