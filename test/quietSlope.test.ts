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
    expect(q.accept(1.9, true, true)).toBe(true);
    expect(q.accept(1.89, true, true)).toBe(false);
    expect(q.accept(2.5, false, true)).toBe(false);
    expect(q.accept(Number.NaN, true, true)).toBe(false);
  });

  it('rests every second hop at most, only after a frame kept on a steady speed, and counts rested hops', () => {
    const q = new QuietSlope();
    expect(q.rest()).toBe(false);
    q.searched(true, 1);
    expect(q.rest()).toBe(false); // no frame kept yet
    expect(q.accept(1, true, false)).toBe(true);
    expect(q.rest()).toBe(false); // kept, but on a slope
    expect(q.accept(1, true, true)).toBe(true);
    expect(q.rest()).toBe(true);
    expect(q.rest()).toBe(false); // never two hops in a row
    expect(q.accept(0.5, true, true)).toBe(false); // the comb dropped: full rate at once
    expect(q.rest()).toBe(false);
    // 1 search, then kept frames alternating with rests: 25 hops in all (12 kept, 12 rested, ...).
    q.searched(true, 1);
    let hops = 0;
    while (q.open()) {
      expect(q.accept(1, true, true)).toBe(true);
      hops++;
      if (q.rest()) hops++;
    }
    expect(hops).toBe(25);
    q.close();
    expect(q.rest()).toBe(false);
  });

  it('asks for a full search after 25 quiet frames, and after close()', () => {
    const q = new QuietSlope();
    q.searched(true, 1);
    for (let i = 0; i < 25; i++) {
      expect(q.open()).toBe(true);
      expect(q.accept(1, true, false)).toBe(true);
    }
    expect(q.open()).toBe(false);
    q.searched(true, 1);
    expect(q.open()).toBe(true);
    q.close();
    expect(q.open()).toBe(false);
  });
});
