/**
 * Transient capture's order kernel (captureKernel.wat) and its JavaScript twin (turnSinCos.ts):
 *  - the kernel is the committed compilation of its text;
 *  - its cosine and sine of 2 pi f, f in turns, against an exact evaluation written here (BigInt
 *    fixed point, 2 pi from Machin's formula pi = 16 atan(1/5) - 4 atan(1/239), Taylor series to
 *    2^-300): within 1.5 ulp over a dense grid and random angles (1.21 ulp measured, a cosine
 *    near 0.7 where the series' last sum rounds);
 *  - the same against Math.cos / Math.sin of 2 pi f, which carry the rounding of 2 pi f
 *    (up to 4.4e-16 in the argument): within 1e-15;
 *  - kernel and twin give the same numbers bit for bit, NaN angles included;
 *  - the products over any split into runs against a per-sample form with Math.cos / Math.sin,
 *    within |x| 2e-15 per power of the 1X phasor, NaN where the angle is unknown;
 *  - where the kernel cannot load (the module's loader made to answer null), the JavaScript
 *    paths give the kernel's products, window sums and decimator outputs bit for bit.
 */
import { readFileSync } from 'node:fs';
import fc from 'fast-check';
import { describe, expect, it, vi } from 'vitest';
import { compileKernel } from '../scripts/compileKernel.ts';
import { SeededRandom } from '../src/simulation/prng.ts';
import { FloatQueue } from '../src/transients/floatQueue.ts';
import { CAPTURE_KERNEL_RUN, captureKernel } from '../src/transients/captureKernel.ts';
import { CAPTURE_KERNEL_WASM_BASE64 } from '../src/transients/captureKernelWasm.ts';
import { appendOrderProducts, phasorPowers, PRODUCT_RUN } from '../src/transients/orderProducts.ts';
import { turnsSinCos } from '../src/transients/turnSinCos.ts';
import { hannWeights } from '../src/transients/orderDemodulation.ts';
import { windowedAmplitudes } from '../src/transients/orderProducts.ts';
import { TriangleDecimator } from '../src/transients/triangleDecimator.ts';

/** Whether the kernel's loader answers with the kernel (true) or as where it cannot load. */
const loader = vi.hoisted(() => ({ kernel: true }));
vi.mock('../src/transients/captureKernel.ts', async (importActual) => {
  const actual = await importActual<typeof import('../src/transients/captureKernel.ts')>();
  return { ...actual, captureKernel: () => (loader.kernel ? actual.captureKernel() : null) };
});

/** Fixed point with P fraction bits. */
const P = 320n;
const ONE = 1n << P;

function atanInverse(x: bigint): bigint {
  let sum = 0n;
  let term = ONE / x;
  const x2 = x * x;
  for (let n = 1n, sign = 1n; term !== 0n; n += 2n, sign = -sign, term /= x2) sum += (sign * term) / n;
  return sum;
}
const TWO_PI = 2n * 4n * (4n * atanInverse(5n) - atanInverse(239n));

/** A double as fixed point, exactly (|d| >= 2^-260 or 0). */
function fixed(d: number): bigint {
  return BigInt(d * 2 ** 160) << (P - 160n);
}

/** cos and sin of 2 pi f (f a double in [0, 1)) in fixed point, to about 2^-300. */
function exactCosSin(f: number): [bigint, bigint] {
  const x = (TWO_PI * fixed(f)) >> P;
  let c = 0n;
  let s = 0n;
  let term = ONE; // x^n / n!
  for (let n = 0n; term !== 0n; n++) {
    const sign = (n / 2n) % 2n === 0n ? 1n : -1n;
    if (n % 2n === 0n) c += sign * term;
    else s += sign * term;
    term = (term * x) / ONE / (n + 1n);
  }
  return [c, s];
}

/** |got - exact| in units of the last place of the exact value. */
function ulpError(got: number, exact: bigint): number {
  const e = Number(exact) / Number(ONE);
  const ulp = 2 ** (Math.floor(Math.log2(Math.abs(e))) - 52);
  return Math.abs(Number(fixed(got) - exact) / Number(ONE)) / ulp;
}

/** Angles in turns: a dense grid, the quarter-turn boundaries and their neighbours, random ones. */
function testAngles(): Float64Array {
  const out: number[] = [];
  for (let i = 0; i < 8192; i++) out.push(i / 8192 + 1 / 65536);
  for (let q = 0; q <= 8; q++) {
    const b = q / 8;
    for (const d of [0, 1e-17, 1e-15, 1e-9, 1e-4]) for (const v of [b - d, b + d]) if (v >= 2 ** -60 && v < 1) out.push(v);
  }
  const random = new SeededRandom(2718);
  for (let i = 0; i < 8192; i++) out.push(random.uniform());
  for (let i = 0; i < 200; i++) out.push(2 ** (-60 + 59 * random.uniform()));
  return Float64Array.from(out);
}

/** Both forms' cosine and sine of `revs` (k = 1), through the kernel's memory in runs. */
function kernelTurns(revs: Float64Array, k: number): { cos: Float64Array; sin: Float64Array } {
  const kernel = captureKernel();
  if (kernel === null) throw new Error('this WebAssembly has no SIMD: the kernel cannot load');
  const cos = new Float64Array(revs.length);
  const sin = new Float64Array(revs.length);
  const x = new Float64Array(CAPTURE_KERNEL_RUN).fill(1);
  for (let done = 0; done < revs.length; done += CAPTURE_KERNEL_RUN) {
    const n = Math.min(CAPTURE_KERNEL_RUN, revs.length - done);
    kernel.x.set(x);
    kernel.revs.set(revs.subarray(done, done + n));
    kernel.turns(n, k, 'b');
    kernel.products(n, 'b', 1);
    for (let j = 0; j < n; j++) {
      cos[done + j] = kernel.runProducts[2 * j];
      sin[done + j] = -kernel.runProducts[2 * j + 1];
    }
  }
  return { cos, sin };
}

describe('order kernel', () => {
  it('is the committed compilation of captureKernel.wat', async () => {
    const wat = readFileSync(new URL('../src/transients/captureKernel.wat', import.meta.url), 'utf8');
    const bytes = await compileKernel(wat);
    expect(Buffer.from(bytes).toString('base64')).toBe(CAPTURE_KERNEL_WASM_BASE64);
  });

  it('gives cosine and sine of 2 pi f within 1.5 ulp of an exact evaluation, and within 1e-15 of Math.cos / Math.sin', () => {
    const f = testAngles();
    const { cos, sin } = kernelTurns(f, 1);
    let worst = { ulps: 0, f: 0, which: '' };
    let worstMath = 0;
    for (let i = 0; i < f.length; i++) {
      const [c, s] = exactCosSin(f[i]);
      for (const [which, got, exact] of [['cos', cos[i], c], ['sin', sin[i], s]] as const) {
        // A zero of the function (f a multiple of 1/4; the series leaves about 2^-300) has no
        // last place: those are checked below.
        if ((exact < 0n ? -exact : exact) < ONE >> 200n) continue;
        const ulps = ulpError(got, exact);
        if (ulps > worst.ulps) worst = { ulps, f: f[i], which };
      }
      worstMath = Math.max(worstMath, Math.abs(cos[i] - Math.cos(2 * Math.PI * f[i])), Math.abs(sin[i] - Math.sin(2 * Math.PI * f[i])));
    }
    console.log(`order kernel: worst ${worst.ulps.toFixed(3)} ulp (${worst.which} at f = ${worst.f}), worst against Math ${worstMath}`);
    expect(worst.ulps, `worst ${worst.which} at f = ${worst.f}`).toBeLessThanOrEqual(1.5);
    expect(worstMath).toBeLessThanOrEqual(1e-15);
    // Whole quarter turns are exact.
    const quarters = kernelTurns(Float64Array.of(0, 0.25, 0.5, 0.75, 3), 1);
    expect(Array.from(quarters.cos, (v) => v + 0)).toEqual([1, 0, -1, 0, 1]);
    expect(Array.from(quarters.sin, (v) => v + 0)).toEqual([0, 1, 0, -1, 0]);
  });

  it('and its JavaScript twin give the same numbers bit for bit, NaN angles included', () => {
    const angle = fc.oneof(
      { weight: 8, arbitrary: fc.double({ min: -1e6, max: 1e6, noNaN: true }) },
      { weight: 1, arbitrary: fc.constantFrom(Number.NaN, Number.POSITIVE_INFINITY, -0, 0.125, 0.875, 2 ** 52 + 0.5) },
    );
    fc.assert(
      fc.property(fc.array(angle, { minLength: 1, maxLength: 1200 }), fc.constantFrom(1, 2, 3.620769230769231, 0.5, 65), (list, k) => {
        const revs = Float64Array.from(list);
        const { cos, sin } = kernelTurns(revs, k);
        const jsCos = new Float64Array(revs.length);
        const jsSin = new Float64Array(revs.length);
        turnsSinCos(revs, revs.length, k, jsCos, jsSin);
        for (let i = 0; i < revs.length; i++) {
          if (!Object.is(cos[i], jsCos[i]) || !Object.is(sin[i], jsSin[i])) {
            expect([cos[i], sin[i]], `rev ${revs[i]}, k ${k}`).toEqual([jsCos[i], jsSin[i]]);
          }
        }
      }),
      { numRuns: 100 },
    );
  });
});

/** One sample's products, per order, with Math.cos / Math.sin (the capture's earlier form). */
function mathProducts(x: number, rev: number, multiples: number[]): Array<[number, number]> {
  return multiples.map((k) => {
    if (Number.isNaN(rev)) return [Number.NaN, Number.NaN];
    const t = Number.isInteger(k) && k <= 64 ? k * (rev - Math.floor(rev)) : k * rev;
    const a = 2 * Math.PI * (t - Math.floor(t));
    return [x * Math.cos(a), -x * Math.sin(a)];
  });
}

describe('order products', () => {
  it('match the per-sample products of Math.cos / Math.sin within |x| 2e-15 per power, whatever the runs, NaN where the angle is unknown', () => {
    const multiples = [1, 2, 5, 3.620769230769231, 0.5, 64, 65, 7];
    const sample = fc.double({ min: -1e3, max: 1e3, noNaN: true });
    const angle = fc.oneof({ weight: 9, arbitrary: fc.double({ min: -50, max: 5e4, noNaN: true }) }, { weight: 1, arbitrary: fc.constant(Number.NaN) });
    let worst = 0;
    fc.assert(
      fc.property(
        fc.array(fc.tuple(sample, angle), { minLength: 1, maxLength: 1500 }),
        fc.array(fc.integer({ min: 1, max: PRODUCT_RUN }), { minLength: 1, maxLength: 8 }),
        (pairs, sizes) => {
          const powers = phasorPowers(multiples);
          const products = multiples.map(() => new FloatQueue(64));
          const xs = Float64Array.from(pairs, (p) => p[0]);
          const revs = new Float64Array(PRODUCT_RUN);
          for (let done = 0, r = 0; done < pairs.length; r++) {
            const n = Math.min(pairs.length - done, sizes[r % sizes.length]);
            for (let j = 0; j < n; j++) revs[j] = pairs[done + j][1];
            appendOrderProducts(xs, done, revs, n, multiples, powers, products);
            done += n;
          }
          pairs.forEach(([x, rev], s) => {
            mathProducts(x, rev, multiples).forEach(([wr, wi], i) => {
              const tol = Math.abs(x) * 2e-15 * Math.max(1, powers[i]);
              const [gr, gi] = [products[i].at(2 * s), products[i].at(2 * s + 1)];
              if (Number.isNaN(wr)) {
                expect([gr, gi]).toEqual([Number.NaN, Number.NaN]);
                return;
              }
              const err = Math.max(Math.abs(gr - wr), Math.abs(gi - wi));
              if (x !== 0) worst = Math.max(worst, err / Math.abs(x) / Math.max(1, powers[i]));
              if (!(err <= tol)) expect({ x, rev, k: multiples[i], got: [gr, gi] }).toEqual({ x, rev, k: multiples[i], got: [wr, wi] });
            });
          });
        },
      ),
      { numRuns: 60 },
    );
    console.log(`order products: worst |difference| / |x| / power against Math.cos / Math.sin ${worst}`);
    expect(worst).toBeGreaterThan(0);
  });
});

describe('capture without the kernel', () => {
  /** Runs `work` with the kernel, then as where it cannot load; returns both results. */
  function both<T>(work: () => T): [T, T] {
    loader.kernel = true;
    const withKernel = work();
    loader.kernel = false;
    try {
      return [withKernel, work()];
    } finally {
      loader.kernel = true;
    }
  }

  it('gives the products, window sums and decimator outputs of the kernel bit for bit', () => {
    const random = new SeededRandom(99);
    const multiples = [1, 2, 5, 3.620769230769231, 0.5, 7];
    const powers = phasorPowers(multiples);
    const n = 3000;
    const xs = Float64Array.from({ length: n }, () => random.normal());
    // Angles unknown (NaN) for samples 2000 to 2019 only.
    const revs = Float64Array.from({ length: n }, (_, i) => (i >= 2000 && i < 2020 ? Number.NaN : 3 + 0.0117 * i + 0.001 * random.normal()));
    const [kernelProducts, jsProducts] = both(() => {
      const products = multiples.map(() => new FloatQueue(64));
      for (let done = 0; done < n; done += 300) {
        const count = Math.min(300, n - done);
        appendOrderProducts(xs, done, revs.subarray(done, done + count), count, multiples, powers, products);
      }
      return products;
    });
    kernelProducts.forEach((q, i) => {
      for (let j = 0; j < 2 * n; j++) if (!Object.is(q.at(j), jsProducts[i].at(j))) expect([i, j, jsProducts[i].at(j)]).toEqual([i, j, q.at(j)]);
    });
    // Windows that avoid the NaN angles' products and those that span them.
    for (const [from, length] of [[10, 512], [300, 1500], [0, 2999]]) {
      const { w, sum } = hannWeights(length);
      const orders = Int32Array.from(multiples.keys());
      const [k, j] = both(() => {
        const outRe = new Float64Array(multiples.length);
        const outIm = new Float64Array(multiples.length);
        windowedAmplitudes(w, sum, from, orders, orders.length, kernelProducts, outRe, outIm);
        return [...outRe, ...outIm];
      });
      expect(j).toEqual(k);
      expect(Number.isNaN(k[0])).toBe(from + length > 2000);
    }
    const samples = Float32Array.from({ length: 50_000 }, () => random.normal());
    const [kd, jd] = both(() => {
      const d = new TriangleDecimator(25_600, 20);
      const out: number[] = [];
      for (let at = 0; at < samples.length; at += 9000) {
        const block = samples.subarray(at, at + 9000);
        const times = new Float64Array(d.mostOutputs(block.length));
        const values = new Float64Array(times.length);
        const m = d.pushInto(block, 1 + at / 25_600, times, values);
        out.push(...times.subarray(0, m), ...values.subarray(0, m));
      }
      return out;
    });
    expect(kd.length).toBeGreaterThan(4000);
    expect(jd).toEqual(kd);
  });
});
