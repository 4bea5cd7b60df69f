import { describe, expect, it } from 'vitest';
import { QuietSlope } from '../src/manipulation/quietSlope.ts';

// The rule that lets the tachless tracker skip its slope search (the accuracy of the tracker
// with it is checked by test/speedRampGrid.test.ts against signals of known speed).
describe('QuietSlope', () => {
  it('opens only after a search that agreed with the prediction', () => {
    const q = new QuietSlope();
    expect(q.open()).toBe(false);
    q.searched(false, 2);
    expect(q.open()).toBe(false);
    q.searched(true, 0);
    expect(q.open()).toBe(false);
    q.searched(true, 2);
    expect(q.open()).toBe(true);
  });

  it('keeps a frame on track whose comb holds 95 % of the reference, and no other', () => {
    const q = new QuietSlope();
    q.searched(true, 2);
    expect(q.accept(1.9, true)).toBe(true);
    expect(q.accept(1.89, true)).toBe(false);
    expect(q.accept(2.5, false)).toBe(false);
    expect(q.accept(Number.NaN, true)).toBe(false);
  });

  it('asks for a full search after 25 quiet frames, and after close()', () => {
    const q = new QuietSlope();
    q.searched(true, 1);
    for (let i = 0; i < 25; i++) {
      expect(q.open()).toBe(true);
      expect(q.accept(1, true)).toBe(true);
    }
    expect(q.open()).toBe(false);
    q.searched(true, 1);
    expect(q.open()).toBe(true);
    q.close();
    expect(q.open()).toBe(false);
  });
});
