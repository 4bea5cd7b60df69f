/**
 * Measured rows of numbers (time first, ascending) kept in columns, one FloatQueue each: a
 * sensor's order and decay rows live seconds (minutes through a long sweep), and as one object
 * per row they were most of what outlived the young generation and made it grow. Values are
 * stored and read back as the same doubles; NaN stands for "none" where a column allows it.
 */
import { FloatQueue } from './floatQueue.ts';

export class RowTable {
  private readonly columns: FloatQueue[];
  private readonly initialCapacity: number;

  constructor(columns: number, capacity = 64) {
    this.initialCapacity = capacity;
    this.columns = Array.from({ length: columns }, () => new FloatQueue(capacity));
  }

  get length(): number {
    return this.columns[0].length;
  }

  /** Doubles held in memory, every column. */
  get capacity(): number {
    let n = 0;
    for (const c of this.columns) n += c.capacity;
    return n;
  }

  /** Appends a row (values beyond the table's columns are ignored). */
  push(c0: number, c1: number, c2: number, c3 = Number.NaN): void {
    const c = this.columns;
    c[0].push(c0);
    c[1].push(c1);
    c[2].push(c2);
    if (c.length > 3) c[3].push(c3);
  }

  /** Column `column` of row `row` (0 the oldest held). */
  at(row: number, column: number): number {
    return this.columns[column].at(row);
  }

  /** Forgets the rows whose time (column 0) is before `beforeS`, and the room a sweep's rows took. */
  dropBefore(beforeS: number): void {
    const t = this.columns[0];
    let n = 0;
    while (n < t.length && t.at(n) < beforeS) n++;
    if (n === 0) return;
    for (const c of this.columns) {
      c.dropFront(n);
      c.shrink(this.initialCapacity);
    }
  }

  clear(): void {
    for (const c of this.columns) c.clear();
  }
}
