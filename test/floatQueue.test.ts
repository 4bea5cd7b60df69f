/**
 * The capture's queue of doubles against a plain array as the model: whatever the sequence of
 * pushes, drops and clears (which slide and grow the typed array underneath), it holds exactly
 * what the model holds, and its array stays within 2.25 times the most it ever held (it grows only
 * when under a third of it is free, by half).
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { FloatQueue } from '../src/transients/floatQueue.ts';

type Op = { push: number } | { drop: number } | { clear: true };

describe('FloatQueue', () => {
  it('holds what a plain array holds through any pushes, drops and clears', () => {
    const op: fc.Arbitrary<Op> = fc.oneof(
      { weight: 8, arbitrary: fc.double({ noNaN: false }).map((v) => ({ push: v })) },
      { weight: 2, arbitrary: fc.nat({ max: 40 }).map((n) => ({ drop: n })) },
      { weight: 1, arbitrary: fc.constant({ clear: true as const }) },
    );
    fc.assert(
      fc.property(fc.array(op, { maxLength: 3000 }), fc.integer({ min: 1, max: 64 }), (ops, capacity) => {
        const q = new FloatQueue(capacity);
        let model: number[] = [];
        let most = 0;
        for (const o of ops) {
          if ('push' in o) model.push(o.push);
          else if ('drop' in o) model = model.slice(Math.min(o.drop, model.length));
          else model = [];
          if ('push' in o) q.push(o.push);
          else if ('drop' in o) q.dropFront(o.drop);
          else q.clear();
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
});
