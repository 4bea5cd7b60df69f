/**
 * The capture's queue of doubles (and its table of measured rows, in columns of such queues)
 * against a plain array as the model: whatever the sequence of
 * pushes, drops and clears (which slide and grow the typed array underneath), it holds exactly
 * what the model holds, and its array stays within 2.25 times the most it ever held (it grows only
 * when under a third of it is free, by half; it shrinks to twice what it holds when asked and
 * a quarter or less is in use).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { FloatQueue } from '../src/transients/floatQueue.ts';
import { RowTable } from '../src/transients/rowTable.ts';

type Op = { push: number } | { drop: number } | { clear: true } | { shrink: number };

describe('FloatQueue', () => {
  it('holds what a plain array holds through any pushes, drops and clears', () => {
    const op: fc.Arbitrary<Op> = fc.oneof(
      { weight: 8, arbitrary: fc.double({ noNaN: false }).map((v) => ({ push: v })) },
      { weight: 2, arbitrary: fc.nat({ max: 40 }).map((n) => ({ drop: n })) },
      { weight: 1, arbitrary: fc.constant({ clear: true as const }) },
      { weight: 1, arbitrary: fc.nat({ max: 50 }).map((n) => ({ shrink: n })) },
    );
    fc.assert(
      fc.property(fc.array(op, { maxLength: 3000 }), fc.integer({ min: 1, max: 64 }), (ops, capacity) => {
        const q = new FloatQueue(capacity);
        let model: number[] = [];
        let most = 0;
        for (const o of ops) {
          if ('push' in o) model.push(o.push);
          else if ('drop' in o) model = model.slice(Math.min(o.drop, model.length));
          else if ('clear' in o) model = [];
          if ('push' in o) q.push(o.push);
          else if ('drop' in o) q.dropFront(o.drop);
          else if ('clear' in o) q.clear();
          else {
            const before = q.capacity;
            q.shrink(o.shrink);
            // Shrunk only when a quarter or less of the array was in use, to twice what it holds (at least the floor).
            const target = Math.max(1, o.shrink, 2 * model.length);
            expect(q.capacity).toBe(before >= 2 * target ? target : before);
          }
          most = Math.max(most, model.length);
          expect(q.length).toBe(model.length);
        }
        for (let i = 0; i < model.length; i++) expect(Object.is(q.at(i), model[i])).toBe(true);
        const { data, offset } = q.view();
        for (let i = 0; i < model.length; i++) expect(Object.is(data[offset + i], model[i])).toBe(true);
        expect(data.length).toBeLessThanOrEqual(Math.max(capacity, Math.ceil(2.25 * most) + 1));
      }),
      { numRuns: 300 },
    );
  });

  it('extend(n) then writing the slots leaves the queue as n pushes would: values, offset and array size', () => {
    type Step = { run: number[] } | { drop: number } | { shrink: number };
    const step: fc.Arbitrary<Step> = fc.oneof(
      { weight: 6, arbitrary: fc.array(fc.double({ noNaN: false }), { maxLength: 90 }).map((run) => ({ run })) },
      { weight: 3, arbitrary: fc.nat({ max: 120 }).map((n) => ({ drop: n })) },
      { weight: 1, arbitrary: fc.nat({ max: 50 }).map((n) => ({ shrink: n })) },
    );
    fc.assert(
      fc.property(fc.array(step, { maxLength: 200 }), fc.integer({ min: 1, max: 64 }), (steps, capacity) => {
        const one = new FloatQueue(capacity);
        const bulk = new FloatQueue(capacity);
        for (const s of steps) {
          if ('run' in s) {
            for (const v of s.run) one.push(v);
            const at = bulk.extend(s.run.length);
            s.run.forEach((v, i) => (bulk.array[at + i] = v));
          } else if ('drop' in s) {
            one.dropFront(s.drop);
            bulk.dropFront(s.drop);
          } else {
            one.shrink(s.shrink);
            bulk.shrink(s.shrink);
          }
          expect(bulk.capacity).toBe(one.capacity);
          expect(bulk.offset).toBe(one.offset);
          expect(bulk.length).toBe(one.length);
        }
        for (let i = 0; i < one.length; i++) expect(Object.is(bulk.at(i), one.at(i))).toBe(true);
      }),
      { numRuns: 300 },
    );
  });

  it('a steady window slides instead of growing (a capture trimming its front as it goes)', () => {
    const q = new FloatQueue(9);
    for (let i = 0; i < 6; i++) q.push(i);
    for (let i = 6; i < 1000; i++) {
      q.dropFront(1);
      q.push(i);
    }
    expect(q.length).toBe(6);
    expect(q.view().data.length, 'six values held in an array of nine never need more').toBe(9);
    expect([0, 1, 2, 3, 4, 5].map((i) => q.at(i))).toEqual([994, 995, 996, 997, 998, 999]);
  });

  it('reset empties into an array of the size asked for', () => {
    const q = new FloatQueue(1);
    for (let i = 0; i < 100; i++) q.push(i);
    q.reset(700);
    expect(q.length).toBe(0);
    expect(q.capacity).toBe(700);
    for (let i = 0; i < 700; i++) q.push(i);
    expect(q.capacity, 'room for what was asked without growing').toBe(700);
  });
});

describe('RowTable', () => {
  it('holds rows in columns as a list of rows would, dropping by time and giving room back', () => {
    fc.assert(
      fc.property(fc.array(fc.oneof(fc.double({ min: 0, max: 10, noNaN: true }), fc.constant(-1)), { maxLength: 2000 }), (steps) => {
        const table = new RowTable(4, 8);
        let model: number[][] = [];
        let t = 0;
        for (const s of steps) {
          if (s >= 0) {
            t += s;
            const row = [t, s * 2, -s, s > 5 ? Number.NaN : s];
            table.push(row[0], row[1], row[2], row[3]);
            model.push(row);
          } else {
            const before = t - 20;
            const held = model.length;
            model = model.filter((r) => r[0] >= before);
            table.dropBefore(before);
            // Rows let go: each column's array is then under twice max(8, twice what it holds).
            if (model.length < held) expect(table.capacity).toBeLessThan(4 * 2 * Math.max(8, 2 * model.length));
          }
          expect(table.length).toBe(model.length);
        }
        for (let r = 0; r < model.length; r++) for (let c = 0; c < 4; c++) expect(Object.is(table.at(r, c), model[r][c])).toBe(true);
      }),
      { numRuns: 200 },
    );
  });
});
