/**
 * The tachless tracker's quiet spells (src/manipulation/quietSlope.ts: while the track holds, one
 * frame at the predicted slope instead of a slope search) must not hide a change of speed that
 * comes after a long steady hold: a sudden step up or down, or a ramp beginning, slow or steep.
 * The signals are made here (test/support/chirp.ts) from a piecewise-linear speed profile whose
 * true speed is known in closed form, independent of the tracker. Every estimate whose frame
 * lies wholly past the change (and, for a ramp, wholly before its end: a frame across a corner
 * reads the frame's average speed, off by about 0.07 x slope change x frame length, as the
 * tracker's header says) must be within 3 rpm (0.4 %) of the true speed at its time. A spell
 * that went on reading the old speed would be off by the whole step (15 to 40 rpm), and one that
 * kept the old slope on a steep ramp loses the ramp's lines. The hold ends at several points of
 * the 25-frame cycle of full searches, and the change must meet an open spell.
 */
import { afterEach, describe, expect, it, vi } from 'vitest';
import { QuietSlope } from '../src/manipulation/quietSlope.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { TachlessTracker } from '../src/manipulation/tachlessTracker.ts';
import { chirpSignal, speedHzAt, DEMO_PUMP_ORDERS, type SpeedProfileHz } from './support/chirp.ts';

// The engine's backend (pffft), whose transform the tracker's frames take in the product.
const FFT = await createRealFft(64);

const FS = 2560;
// The demo pump's range and levels, as test/speedRampGrid.test.ts takes them (config/demo-map.yaml).
const ORDERS = DEMO_PUMP_ORDERS;
const TOLERANCE_RPM = 3;
const accept = QuietSlope.prototype.accept;
const rest = QuietSlope.prototype.rest;

/** A hold at `fromHz` for holdS, then a change to `toHz` over `changeS` (0.02 s: a step), then a hold of `afterS`. */
interface Change {
  fromHz: number;
  toHz: number;
  changeS: number;
  afterS: number;
}

const CHANGES: Record<string, Change> = {
  'a step up of 5 %': { fromHz: 13, toHz: 13.65, changeS: 0.02, afterS: 5 },
  'a step up of 2 %': { fromHz: 13, toHz: 13.26, changeS: 0.02, afterS: 5 },
  'a step down of 4 %': { fromHz: 13, toHz: 12.5, changeS: 0.02, afterS: 5 },
  'a ramp of 3 rpm/s': { fromHz: 13, toHz: 13.4, changeS: 8, afterS: 1 },
  'a ramp of 30 rpm/s': { fromHz: 13, toHz: 15.5, changeS: 5, afterS: 1 },
  'a ramp of 150 rpm/s': { fromHz: 10, toHz: 19.5, changeS: 3.8, afterS: 1 },
  'a ramp of 300 rpm/s down': { fromHz: 19.5, toHz: 8, changeS: 2.3, afterS: 1 },
};

describe('quiet spells of the tachless tracker after a long hold', () => {
  afterEach(() => vi.restoreAllMocks());
  for (const [name, c] of Object.entries(CHANGES)) {
    it(`follow ${name} to the true speed`, () => {
      for (const holdS of [20, 20.7, 22.5, 24.1]) {
        const profile: SpeedProfileHz = { startHz: c.fromHz, segments: [{ durS: holdS, toHz: c.fromHz }, { durS: c.changeS, toHz: c.toHz }, { durS: c.afterS, toHz: c.toHz }] };
        const x = chirpSignal({ profile, rateHz: FS, refHz: 1100 / 60, orders: ORDERS, noiseG: 0.002, structural: { fnHz: 14.2, q: 8, levelG: 0.001 }, seed: 21 });
        const tr = new TachlessTracker({ inputRateHz: FS, rangeRpm: [450, 1200], minConfidence: 0.6, fft: FFT });
        const step = c.changeS < 0.1;
        // Frames wholly past the change's start (and, on a ramp, wholly before its end).
        const fromS = holdS + (step ? c.changeS : 0) + tr.frameS / 2;
        const toS = step ? Number.POSITIVE_INFINITY : holdS + c.changeS - tr.frameS / 2;
        let checked = 0;
        let worst = 0;
        // Quiet hops in the last 2 s of the hold (data time of the frames' centres): frames read
        // alone at the predicted slope and kept, or skipped while the spell rested.
        let quietBefore = 0;
        let centreS = 0;
        vi.restoreAllMocks();
        vi.spyOn(QuietSlope.prototype, 'accept').mockImplementation(function (this: QuietSlope, comb: number, onTrack: boolean, steady: boolean) {
          const kept = accept.call(this, comb, onTrack, steady);
          if (kept && centreS > holdS - 2 && centreS < holdS) quietBefore++;
          return kept;
        });
        vi.spyOn(QuietSlope.prototype, 'rest').mockImplementation(function (this: QuietSlope) {
          const rested = rest.call(this);
          if (rested && centreS > holdS - 2 && centreS < holdS) quietBefore++;
          return rested;
        });
        for (let i = 0; i < x.length; i += 256) {
          centreS = i / FS - tr.lagS;
          for (const p of tr.push(x.subarray(i, i + 256), i / FS)) {
            if (p.tS < fromS || p.tS > toS) continue;
            expect(p.rpm, `hold ${holdS} s: no speed at ${p.tS.toFixed(2)} s`).not.toBeNull();
            const err = Math.abs((p.rpm as number) - speedHzAt(profile, p.tS) * 60);
            worst = Math.max(worst, err);
            checked++;
          }
        }
        expect(quietBefore, `hold ${holdS} s: quiet hops just before the change`).toBeGreaterThan(3);
        expect(checked, `hold ${holdS} s: estimates past the change`).toBeGreaterThanOrEqual(4);
        expect(worst, `hold ${holdS} s: worst error past the change (rpm)`).toBeLessThanOrEqual(TOLERANCE_RPM);
      }
    });
  }
});
