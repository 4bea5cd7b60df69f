/**
 * The tachless tracker's watch over the whole range (src/manipulation/tachlessTracker.ts, step 5):
 * a track that sits on one line family while a confident family stands elsewhere for a second
 * is dropped, and the next frames start afresh on what the range holds. The track here sits in
 * a quiet spell (one frame a hop at the predicted slope) when a much stronger family appears
 * 50 % higher, as a second machine coming on or a track that had settled on a wrong family: the
 * estimates must move to it within LOST_AFTER_S (1 s) of data after its lines fill a frame,
 * plus a frame to start afresh. The signals are made here (test/support/chirp.ts).
 */
import { afterEach, describe, expect, it, vi } from 'vitest';
import { QuietSlope } from '../src/manipulation/quietSlope.ts';
import { createRealFft } from '../src/manipulation/realFft.ts';
import { TachlessTracker } from '../src/manipulation/tachlessTracker.ts';
import { chirpSignal, type OrderTone } from './support/chirp.ts';

// The engine's backend (pffft), whose transform the tracker's frames take in the product.
const FFT = await createRealFft(64);

const FS = 2560;
// The track's family, weak enough (about 6 to 12 dB over the noise's lines at 1X) that a family
// five times stronger elsewhere is a confident answer over the whole range.
const FAMILY: OrderTone[] = [
  { multiple: 1, peakG: 0.004, scaling: 'constant' },
  { multiple: 2, peakG: 0.002, scaling: 'constant' },
  { multiple: 3, peakG: 0.004 / 3, scaling: 'constant' },
];
const ONSET_S = 12;

describe('the tachless tracker watching the whole range', () => {
  afterEach(() => vi.restoreAllMocks());

  it('drops a quiet track for a confident family elsewhere within a second of data, and follows that family', () => {
    // Quiet hops: frames read alone at the predicted slope and kept, or skipped while the spell rested.
    const quietFrames = vi.spyOn(QuietSlope.prototype, 'accept');
    const restedHops = vi.spyOn(QuietSlope.prototype, 'rest');
    for (const [slowHz, fastHz, onsetS] of [[19, 8, ONSET_S], [18.33, 7.83, ONSET_S + 0.7], [19.5, 8.5, ONSET_S + 0.3]]) {
      const durS = onsetS + 8;
      const a = chirpSignal({ profile: { startHz: slowHz, segments: [{ durS, toHz: slowHz }] }, rateHz: FS, refHz: slowHz, orders: FAMILY, noiseG: 0.002, seed: 5 });
      const strong = FAMILY.map((o) => ({ ...o, peakG: 5 * o.peakG }));
      const b = chirpSignal({ profile: { startHz: fastHz, segments: [{ durS, toHz: fastHz }] }, rateHz: FS, refHz: fastHz, orders: strong, noiseG: 0, seed: 6 });
      const x = a.map((v, i) => v + (i >= onsetS * FS ? b[i] : 0));
      const tr = new TachlessTracker({ inputRateHz: FS, rangeRpm: [450, 1200], minConfidence: 0.6, fft: FFT });
      const trusted: { tS: number; rpm: number }[] = [];
      let quietBefore = 0;
      for (let i = 0; i < x.length; i += FS / 10) {
        for (const p of tr.push(x.subarray(i, i + FS / 10), i / FS)) if (p.rpm !== null && p.confidence >= 0.6) trusted.push({ tS: p.tS, rpm: p.rpm });
        if (i < (onsetS - tr.frameS) * FS) quietBefore = [...quietFrames.mock.results, ...restedHops.mock.results].filter((r) => r.value === true).length;
      }
      const what = `${slowHz * 60} rpm, then ${fastHz * 60} rpm from ${onsetS} s`;
      expect(quietBefore, `${what}: quiet hops before the onset`).toBeGreaterThan(20);
      const before = trusted.filter((p) => p.tS < onsetS - tr.frameS / 2);
      expect(before.length, what).toBeGreaterThan(30);
      for (const p of before) expect(Math.abs(p.rpm / (slowHz * 60) - 1), `${what}: ${p.rpm} rpm at ${p.tS} s`).toBeLessThan(0.005);
      // The first frame wholly past the onset has its centre at onset + T / 2; then a second of
      // data away from the track, and one more frame (0.2 s) starts afresh.
      const switchS = trusted.find((p) => p.tS > onsetS && Math.abs(p.rpm / (fastHz * 60) - 1) < 0.005)?.tS;
      expect(switchS, `${what}: never followed the new family`).toBeDefined();
      expect(switchS as number, what).toBeLessThanOrEqual(onsetS + tr.frameS / 2 + 1.0 + 0.2 + 0.2);
      // Followed to the end: a trusted estimate at least every second hop (a quiet track rests
      // every second frame), on the new family.
      const after = trusted.filter((p) => p.tS > (switchS as number));
      expect(after.length, what).toBeGreaterThan(10);
      for (let k = 1; k < after.length; k++) expect(after[k].tS - after[k - 1].tS, `${what}: gap after ${after[k - 1].tS} s`).toBeLessThan(0.41);
      expect(after[after.length - 1].tS, what).toBeGreaterThan(durS - tr.lagS - 0.41);
      for (const p of after) expect(Math.abs(p.rpm / (fastHz * 60) - 1), `${what}: ${p.rpm} rpm at ${p.tS} s`).toBeLessThan(0.005);
      quietFrames.mockClear();
      restedHops.mockClear();
    }
  });
});
