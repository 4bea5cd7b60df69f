/**
 * Transient capture works on runs of samples (angles for a run, then each order's products over
 * it, written straight into the queues; two orders per pass over a window). Each part here is
 * held bit for bit to a straightforward per-sample form kept in this file, the form the capture
 * had before it worked in runs, over random splits of the samples into runs and with samples
 * of unknown angle (NaN):
 *  - the demodulation products of every order (whole multiples as powers of the 1X phasor,
 *    others with their own cosine and sine), in the WebAssembly kernel where it loads;
 *  - each order's windowed amplitude (four orders a pass; in the kernel, in parts of a window);
 *  - the shaft angle between once-per-rev marks (a bisection per sample in the reference), with
 *    lost revolutions, a silent tach and a restart;
 *  - the integrated (tachless) angle, with stretches of unknown speed;
 *  - the triangle decimator, which sums a block of its input in one loop (a test per sample
 *    before), in the WebAssembly kernel where it loads, over random block sizes (some longer
 *    than the kernel takes a call) and with NaN samples.
 * Equal means Object.is: the same double, NaN only where the reference has NaN.
 */
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { FloatQueue } from '../src/transients/floatQueue.ts';
import { hannWeights } from '../src/transients/orderDemodulation.ts';
import { appendOrderProducts, phasorPowers, PRODUCT_RUN, windowedAmplitudes } from '../src/transients/orderProducts.ts';
import { IntegratedAngle, MarkAngles } from '../src/transients/shaftAngles.ts';
import { TriangleDecimator } from '../src/transients/triangleDecimator.ts';
import { turnsSinCos } from '../src/transients/turnSinCos.ts';

const MULTIPLES = [1, 2, 5, 3.620769230769231, 0.5, 64, 65, 7];

/**
 * The products of one sample, per order, as the capture formed them one sample at a time, with
 * the cosine and sine of whole turns of turnSinCos.ts (test/captureKernel.test.ts holds those to an
 * exact evaluation and to Math.cos / Math.sin).
 */
function referenceProducts(x: number, rev: number, multiples: number[]): Array<[number, number]> {
  if (Number.isNaN(rev)) return multiples.map(() => [Number.NaN, Number.NaN]);
  const [c1, s1] = turn(rev, 1);
  return multiples.map((k) => {
    if (!(Number.isInteger(k) && k >= 1 && k <= 64)) return turn(rev, k).map((v, i) => (i === 0 ? x * v : -x * v)) as [number, number];
    let [c, sn] = [c1, s1];
    for (let p = 1; p < k; p++) [c, sn] = [c * c1 - sn * s1, sn * c1 + c * s1];
    return [x * c, -x * sn];
  });
}

/** cos and sin of 2 pi frac(k rev), one angle at a time. */
function turn(rev: number, k: number): [number, number] {
  const [c, s] = [new Float64Array(1), new Float64Array(1)];
  turnsSinCos(Float64Array.of(rev), 1, k, c, s);
  return [c[0], s[0]];
}

/** Splits `n` items into runs of 1..PRODUCT_RUN (sizes drawn from `sizes`, cycled). */
function runsOf(n: number, sizes: number[]): number[] {
  const out: number[] = [];
  for (let done = 0, i = 0; done < n; i++) {
    const size = Math.min(n - done, sizes[i % sizes.length]);
    out.push(size);
    done += size;
  }
  return out;
}

const sample = fc.double({ min: -1e3, max: 1e3, noNaN: true });
const angle = fc.oneof({ weight: 9, arbitrary: fc.double({ min: -50, max: 5e4, noNaN: true }) }, { weight: 1, arbitrary: fc.constant(Number.NaN) });

describe('order products over runs', () => {
  it('equal the per-sample products bit for bit, whatever the runs, NaN where the angle is unknown', () => {
    fc.assert(
      fc.property(
        fc.array(fc.tuple(sample, angle), { minLength: 1, maxLength: 1500 }),
        fc.array(fc.integer({ min: 1, max: PRODUCT_RUN }), { minLength: 1, maxLength: 8 }),
        fc.subarray(MULTIPLES, { minLength: 1 }),
        fc.integer({ min: 1, max: 300 }),
        (pairs, sizes, multiples, capacity) => {
          const powers = phasorPowers(multiples);
          const products = multiples.map(() => new FloatQueue(2 * capacity));
          // The samples sit in a queue of their own, not from index 0, as in the capture.
          const xs = new FloatQueue(7);
          for (let i = 0; i < 5; i++) xs.push(99);
          for (const [x] of pairs) xs.push(x);
          xs.dropFront(5);
          const revs = new Float64Array(PRODUCT_RUN);
          let done = 0;
          for (const n of runsOf(pairs.length, sizes)) {
            for (let j = 0; j < n; j++) revs[j] = pairs[done + j][1];
            appendOrderProducts(xs.array, xs.offset + done, revs, n, multiples, powers, products);
            done += n;
          }
          pairs.forEach(([x, rev], s) => {
            const want = referenceProducts(x, rev, multiples);
            want.forEach(([wr, wi], i) => {
              expect(Object.is(products[i].at(2 * s), wr)).toBe(true);
              expect(Object.is(products[i].at(2 * s + 1), wi)).toBe(true);
            });
          });
          for (const q of products) expect(q.length).toBe(2 * pairs.length);
        },
      ),
      { numRuns: 150 },
    );
  });

  it('give each order the windowed amplitude of a pass of its own, bit for bit, over windows longer than the kernel takes a call', () => {
    fc.assert(
      fc.property(
        // Windows up to 2,500 samples: more than the kernel sums a call (WINDOW_CHUNK).
        fc.oneof({ weight: 3, arbitrary: fc.array(fc.tuple(sample, angle), { minLength: 8, maxLength: 700 }) }, { weight: 1, arbitrary: fc.array(fc.tuple(sample, angle), { minLength: 1000, maxLength: 2500 }) }),
        fc.subarray(MULTIPLES, { minLength: 1 }),
        fc.nat(),
        fc.nat(),
        fc.boolean(),
        (pairs, multiples, fromSeed, pick, oneHistory) => {
          const powers = phasorPowers(multiples);
          // Queues of one history (as in the capture) or not: samples dropped from the front of
          // each after the products leave them at other offsets in their arrays.
          const products = multiples.map(() => new FloatQueue(6000));
          const lead = (q: number): number => (oneHistory ? 5 : 5 + 3 * q);
          products.forEach((q, i) => {
            for (let j = 0; j < 2 * lead(i); j++) q.push(1e300);
          });
          const xs = Float64Array.from(pairs, (p) => p[0]);
          const revs = Float64Array.from(pairs, (p) => p[1]);
          for (let done = 0; done < pairs.length; done += PRODUCT_RUN) {
            const n = Math.min(PRODUCT_RUN, pairs.length - done);
            appendOrderProducts(xs, done, revs.subarray(done), n, multiples, powers, products);
          }
          products.forEach((q, i) => q.dropFront(2 * lead(i)));
          // Some orders, in order, as the capture lists those below its limit.
          const listed = multiples.map((_, i) => i).filter((i) => (pick >> i) & 1 || i === 0);
          const orders = Int32Array.from(listed);
          const from = fromSeed % (pairs.length - 7);
          const length = 8 + ((fromSeed >> 4) % (pairs.length - from - 7));
          const { w, sum } = hannWeights(length);
          const outRe = new Float64Array(multiples.length).fill(-7);
          const outIm = new Float64Array(multiples.length).fill(-7);
          windowedAmplitudes(w, sum, from, orders, orders.length, products, outRe, outIm);
          multiples.forEach((_, i) => {
            if (!listed.includes(i)) {
              expect(outRe[i], 'an order not listed is left alone').toBe(-7);
              return;
            }
            let r = 0;
            let m = 0;
            for (let n = 0; n < length; n++) {
              r += w[n] * products[i].at(2 * (from + n));
              m += w[n] * products[i].at(2 * (from + n) + 1);
            }
            expect(Object.is(outRe[i], (2 * r) / sum)).toBe(true);
            expect(Object.is(outIm[i], (2 * m) / sum)).toBe(true);
          });
        },
      ),
      { numRuns: 150 },
    );
  });
});

/** Marks and their angle as the capture kept them before: a list of marks, a bisection per sample. */
class ReferenceMarks {
  marks: Array<{ tS: number; rev: number }> = [];
  private nextRev = 0;
  constructor(private readonly maxAgeS: number) {}

  pushRevolution(tS: number, rpm: number): void {
    const last = this.marks[this.marks.length - 1];
    if (last && Math.abs(tS - 60 / rpm - last.tS) > (0.25 * 60) / rpm) this.marks.push({ tS: Number.NaN, rev: Number.NaN });
    if (!last) this.marks.push({ tS: tS - 60 / rpm, rev: this.nextRev++ });
    this.marks.push({ tS, rev: this.nextRev++ });
    if (this.marks.length > 4096) this.marks.splice(0, this.marks.length - 2048);
  }

  angleAt(tS: number, untilS: number): number | null {
    const m = this.marks;
    const last = m[m.length - 1];
    if (!last || tS > last.tS || Number.isNaN(last.tS)) return untilS - tS > this.maxAgeS ? Number.NaN : null;
    if (!(tS >= m[0].tS)) return Number.NaN;
    let lo = 0;
    let hi = m.length - 1;
    while (hi - lo > 1) {
      const mid = (lo + hi) >> 1;
      if (Number.isNaN(m[mid].tS) || m[mid].tS <= tS) lo = mid;
      else hi = mid;
    }
    const a = m[lo];
    const b = m[hi];
    if (Number.isNaN(a.tS) || Number.isNaN(b.tS)) return Number.NaN;
    return a.rev + (tS - a.tS) / (b.tS - a.tS);
  }
}

/** Fills runs of samples from `source` as the capture does; the reference asks sample by sample. */
function compareFills(
  fill: (first: number, count: number, untilS: number, out: Float64Array) => number,
  reference: (tS: number, untilS: number) => number | null,
  baseS: number,
  rateHz: number,
  state: { processed: number },
  waiting: number,
  untilS: number,
): void {
  const want: number[] = [];
  for (let p = state.processed; p < state.processed + waiting; p++) {
    const tS = baseS + p / rateHz;
    if (tS > untilS) break;
    const rev = reference(tS, untilS);
    if (rev === null) break;
    want.push(rev);
  }
  const got: number[] = [];
  const out = new Float64Array(PRODUCT_RUN);
  for (;;) {
    const count = Math.min(waiting - got.length, PRODUCT_RUN);
    if (count <= 0) break;
    const n = fill(state.processed + got.length, count, untilS, out);
    for (let i = 0; i < n; i++) got.push(out[i]);
    if (n < count) break;
  }
  expect(got.length).toBe(want.length);
  for (let i = 0; i < want.length; i++) if (!Object.is(got[i], want[i])) expect(got[i]).toBe(want[i]);
  state.processed += got.length;
}

describe('shaft angle over runs', () => {
  it('between marks equals a bisection per sample, through lost revolutions, silences and restarts', () => {
    fc.assert(
      fc.property(
        fc.array(
          fc.oneof(
            { weight: 12, arbitrary: fc.record({ revs: fc.integer({ min: 0, max: 30 }), rpm: fc.double({ min: 300, max: 3000, noNaN: true }), stepS: fc.double({ min: 0.01, max: 0.4, noNaN: true }) }) },
            { weight: 1, arbitrary: fc.constant('lose' as const) },
            { weight: 1, arbitrary: fc.constant('silence' as const) },
            { weight: 1, arbitrary: fc.constant('restart' as const) },
          ),
          { minLength: 1, maxLength: 60 },
        ),
        fc.double({ min: 50, max: 3000, noNaN: true }),
        (script, rateHz) => {
          const maxAgeS = 1;
          const marks = new MarkAngles(maxAgeS);
          const ref = new ReferenceMarks(maxAgeS);
          const baseS = 10;
          let tachS = baseS + 0.05;
          let untilS = baseS;
          const state = { processed: 0 };
          for (const s of script) {
            if (s === 'lose') tachS += 0.3;
            else if (s === 'silence') untilS += 1.5;
            else if (s === 'restart') {
              marks.clear();
              ref.marks = [];
            } else {
              for (let r = 0; r < s.revs; r++) {
                tachS += 60 / s.rpm;
                marks.pushRevolution(tachS, s.rpm);
                ref.pushRevolution(tachS, s.rpm);
              }
              untilS = Math.max(untilS, tachS - 0.05) + s.stepS;
            }
            // Every sample received up to untilS waits for its angle.
            const waiting = Math.max(0, Math.floor((untilS - baseS) * rateHz) + 1 - state.processed);
            compareFills((f, c, u, o) => marks.fill(baseS, rateHz, f, c, u, o), (t, u) => ref.angleAt(t, u), baseS, rateHz, state, waiting, untilS);
          }
        },
      ),
      { numRuns: 200 },
    );
  });

  it('keeps matching after thousands of marks, when the oldest are dropped', () => {
    const marks = new MarkAngles(1);
    const ref = new ReferenceMarks(1);
    const rateHz = 400;
    const state = { processed: 0 };
    let tachS = 0.02;
    for (let step = 0; step < 600; step++) {
      for (let r = 0; r < 10; r++) {
        // A lost revolution now and then, early on (the NaN mark is dropped later).
        tachS += step === 30 && r === 3 ? 0.2 : 0.05;
        marks.pushRevolution(tachS, 1200);
        ref.pushRevolution(tachS, 1200);
      }
      compareFills((f, c, u, o) => marks.fill(0, rateHz, f, c, u, o), (t, u) => ref.angleAt(t, u), 0, rateHz, state, Math.floor(tachS * rateHz) + 1 - state.processed, tachS);
    }
    expect(state.processed).toBeGreaterThan(100_000);
  });

  it('integrated from the speed equals the per-sample integral, through unknown speed', () => {
    fc.assert(
      fc.property(
        fc.array(fc.record({ stepS: fc.double({ min: 0.001, max: 0.5, noNaN: true }), known: fc.boolean(), reset: fc.boolean() }), { minLength: 1, maxLength: 40 }),
        fc.double({ min: 50, max: 3000, noNaN: true }),
        (steps, rateHz) => {
          const source = new IntegratedAngle();
          // Reference: the closure the capture built per step, state per sensor.
          let st: { tS: number; rev: number; rpm: number; lookedUpS: number; lookedUpRpm: number } | null = null;
          const baseS = 3;
          let untilS = baseS;
          const state = { processed: 0 };
          for (const s of steps) {
            untilS += s.stepS;
            const speedAt = (t: number): number | null => (s.known && Math.sin(t * 3) > -0.8 ? 900 + 300 * Math.sin(t) : null);
            if (s.reset) {
              source.reset();
              st = null;
            }
            source.speedAt = speedAt;
            const reference = (tS: number, until: number): number | null => {
              if (tS > until) return null;
              let rpm: number | null;
              if (st && tS - st.lookedUpS < 0.01) rpm = st.lookedUpRpm;
              else {
                rpm = speedAt(tS);
                if (st && rpm !== null) {
                  st.lookedUpS = tS;
                  st.lookedUpRpm = rpm;
                }
              }
              if (rpm === null) {
                st = null;
                return Number.NaN;
              }
              if (!st) {
                st = { tS, rev: 0, rpm, lookedUpS: tS, lookedUpRpm: rpm };
                return 0;
              }
              st.rev += ((st.rpm + rpm) / 120) * (tS - st.tS);
              st.tS = tS;
              st.rpm = rpm;
              return st.rev;
            };
            // More samples wait than the speed reaches: the fill stops at untilS.
            const waiting = Math.floor((untilS + 0.2 - baseS) * rateHz) - state.processed;
            compareFills((f, c, u, o) => source.fill(baseS, rateHz, f, c, u, o), reference, baseS, rateHz, state, Math.max(0, waiting), untilS);
          }
        },
      ),
      { numRuns: 200 },
    );
  });
});

/** The decimator's state and its per-sample loop as it was (a test per sample), for reference. */
function referenceDecimator(m: number, rateHz: number): (samples: Float32Array, t0S: number) => Array<[number, number]> {
  let sum = 0;
  let ramp = 0;
  let fill = 0;
  let prevRamp = 0;
  let havePrev = false;
  let blockStartS = Number.NaN;
  return (samples, t0S) => {
    const out: Array<[number, number]> = [];
    for (let n = 0; n < samples.length; n++) {
      if (fill === 0) blockStartS = t0S + n * (1 / rateHz);
      const x = samples[n];
      ramp += fill * x;
      sum += x;
      fill++;
      if (fill < m) continue;
      if (havePrev) out.push([blockStartS, (m * sum - ramp + prevRamp) * (1 / (m * m))]);
      prevRamp = ramp;
      havePrev = true;
      sum = 0;
      ramp = 0;
      fill = 0;
    }
    return out;
  };
}

describe('triangle decimator over blocks', () => {
  it('gives the outputs and times of the per-sample loop bit for bit, whatever the block sizes, NaN samples included', () => {
    const value = fc.oneof({ weight: 30, arbitrary: fc.float({ noNaN: true, noDefaultInfinity: true }) }, { weight: 1, arbitrary: fc.constant(Number.NaN) });
    // Blocks up to 300 samples, and some longer than the kernel takes a call (DECIMATE_CHUNK).
    const block = fc.oneof({ weight: 9, arbitrary: fc.array(value, { maxLength: 300 }) }, { weight: 1, arbitrary: fc.array(value, { minLength: 8000, maxLength: 20_000 }) });
    fc.assert(
      fc.property(fc.array(block, { maxLength: 30 }), fc.integer({ min: 1, max: 40 }), (blocks, m) => {
        const rateHz = 25_600;
        const d = new TriangleDecimator(rateHz, m);
        const ref = referenceDecimator(m, rateHz);
        let t0S = 7;
        for (const b of blocks) {
          const samples = Float32Array.from(b);
          const times = new Float64Array(d.mostOutputs(samples.length));
          const values = new Float64Array(times.length);
          const n = d.pushInto(samples, t0S, times, values);
          const want = ref(samples, t0S);
          expect(n).toBe(want.length);
          want.forEach(([t, v], i) => {
            expect(Object.is(times[i], t)).toBe(true);
            expect(Object.is(values[i], v)).toBe(true);
          });
          t0S += samples.length / rateHz;
        }
      }),
      { numRuns: 300 },
    );
  });
});
