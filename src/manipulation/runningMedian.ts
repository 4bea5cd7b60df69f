/**
 * Running median of a spectrum's lines: out[i] = median of a[i - half .. i + half] clipped to
 * lines 1..lastLine (line 0, DC, left out), for i = from..topLine (from 1 unless told: a caller
 * that holds the medians up to some line extends them); with an even count, the mean of the two
 * middle values.
 *
 * The window is kept sorted in a typed array, with the slot of each line in it. Where one line
 * enters as one leaves (every line but those near the ends), the leaving line's slot is moved
 * to where the entering value belongs, shifting only the values between the two (about a third
 * of the window for values in random order, against a whole window and two binary searches for
 * an insertion and a removal). Any exact method gives the same medians. A spectrum holding NaN, which no ordering
 * places, takes separate insertions and removals (what a sorted list with splice gives) from
 * line 1 whatever `from` says, since there the medians depend on the order of entry. Nothing
 * is allocated per call once the scratch has grown.
 *
 * Where WebAssembly SIMD is there, spectra without NaN go to the kernel's `runningMedian`
 * (spectrumKernel.wat: the same sorted window, each place found by a lane-wise count of the
 * values below it instead of a walk along the window), about 2.5 times faster on the tracker's
 * spectra; medians are values of the window, so both give the same numbers.
 */
import { spectrumKernel, type SpectrumKernel } from './spectrumKernel.ts';

let win = new Float64Array(64);
/** The kernel's lines, window and medians (grown on demand), and views on them. */
let inKernel: { kernel: SpectrumKernel; lines: number; half: number; a: number; w: number; out: number; buffer: ArrayBufferLike; aV: Float64Array; outV: Float64Array } | null | undefined;
/** Which line holds each slot of the window, and which slot each line holds. */
let lineAt = new Int32Array(64);
let slotOf = new Int32Array(256);

/** `useKernel` false: the JavaScript below even where the kernel is there (for the tests). */
export function runningMedian(a: Float64Array, half: number, topLine: number, lastLine: number, out: Float64Array, from = 1, useKernel = true): void {
  const last = Math.min(lastLine, topLine + half);
  const first = Math.max(1, from - half);
  for (let i = 1; i <= last; i++) if (Number.isNaN(a[i])) return insertRemoveMedian(a, half, topLine, lastLine, out);
  if (useKernel && from <= topLine && topLine <= lastLine && kernelMedian(a, half, topLine, lastLine, out, Math.max(1, from), first, last)) return;
  if (win.length < 2 * half + 2) {
    win = new Float64Array(2 * half + 2);
    lineAt = new Int32Array(2 * half + 2);
  }
  if (slotOf.length <= last) slotOf = new Int32Array(2 * last + 2);
  const w = win;
  const line = lineAt;
  const slot = slotOf;
  let n = 0;
  let lo = first; // window is [lo, hi)
  let hi = first;
  for (let i = Math.max(1, from); i <= topLine; i++) {
    const wantLo = Math.max(1, i - half);
    const wantHi = Math.min(lastLine, i + half) + 1;
    while (hi < wantHi && lo < wantLo) {
      // One in, one out: the leaving line's slot moves to where the entering value belongs.
      const v = a[hi];
      let at = slot[lo++];
      if (v > w[at]) {
        while (at + 1 < n && w[at + 1] < v) {
          w[at] = w[at + 1];
          line[at] = line[at + 1];
          slot[line[at]] = at;
          at++;
        }
      } else {
        while (at > 0 && w[at - 1] > v) {
          w[at] = w[at - 1];
          line[at] = line[at - 1];
          slot[line[at]] = at;
          at--;
        }
      }
      w[at] = v;
      line[at] = hi;
      slot[hi++] = at;
    }
    while (hi < wantHi) {
      // Enters: a binary search for its place, the larger values shift up.
      const v = a[hi];
      const at = lowerBound(w, n, v);
      for (let k = n; k > at; k--) {
        w[k] = w[k - 1];
        line[k] = line[k - 1];
        slot[line[k]] = k;
      }
      w[at] = v;
      line[at] = hi;
      slot[hi++] = at;
      n++;
    }
    while (lo < wantLo) {
      // Leaves: the larger values shift down into its slot.
      n--;
      for (let k = slot[lo++]; k < n; k++) {
        w[k] = w[k + 1];
        line[k] = line[k + 1];
        slot[line[k]] = k;
      }
    }
    out[i] = n % 2 === 1 ? w[(n - 1) / 2] : 0.5 * (w[n / 2 - 1] + w[n / 2]);
  }
}

/** The medians in the kernel: lines first..last copied in, lines from..topLine out. False where there is no kernel. */
function kernelMedian(a: Float64Array, half: number, topLine: number, lastLine: number, out: Float64Array, from: number, first: number, last: number): boolean {
  if (inKernel === undefined) {
    const kernel = spectrumKernel();
    inKernel = kernel && { kernel, lines: 0, half: -1, a: 0, w: 0, out: 0, buffer: kernel.memory.buffer, aV: new Float64Array(0), outV: new Float64Array(0) };
  }
  const k = inKernel;
  if (k === null) return false;
  const lines = Math.max(last, topLine) + 1;
  if (k.lines < lines) {
    if (k.lines > 0) {
      k.kernel.release(k.a, 8 * k.lines);
      k.kernel.release(k.out, 8 * k.lines);
    }
    k.lines = Math.max(lines, 2 * k.lines);
    k.a = k.kernel.alloc(8 * k.lines);
    k.out = k.kernel.alloc(8 * k.lines);
    k.buffer = new ArrayBuffer(0); // views taken below
  }
  if (k.half < half) {
    if (k.half >= 0) k.kernel.release(k.w, 8 * (2 * k.half + 3));
    k.half = half;
    k.w = k.kernel.alloc(8 * (2 * half + 3));
  }
  if (k.buffer !== k.kernel.memory.buffer) {
    k.buffer = k.kernel.memory.buffer;
    k.aV = k.kernel.f64(k.a, k.lines);
    k.outV = k.kernel.f64(k.out, k.lines);
  }
  const aV = k.aV;
  for (let i = first; i <= last; i++) aV[i] = a[i];
  k.kernel.fn.runningMedian(k.a, k.w, k.out, half, from, topLine, lastLine);
  const outV = k.outV;
  for (let i = from; i <= topLine; i++) out[i] = outV[i];
  return true;
}

/** The same medians by separate insertions and removals. */
function insertRemoveMedian(a: Float64Array, half: number, topLine: number, lastLine: number, out: Float64Array): void {
  if (win.length < 2 * half + 2) win = new Float64Array(2 * half + 2);
  const w = win;
  let n = 0;
  let lo = 1;
  let hi = 1;
  for (let i = 1; i <= topLine; i++) {
    const wantLo = Math.max(1, i - half);
    const wantHi = Math.min(lastLine, i + half) + 1;
    while (hi < wantHi) n = insert(w, n, a[hi++]);
    while (lo < wantLo) n = remove(w, n, a[lo++]);
    out[i] = n % 2 === 1 ? w[(n - 1) / 2] : 0.5 * (w[n / 2 - 1] + w[n / 2]);
  }
}

/** Inserts v into the sorted w[0..n); returns the new count. */
function insert(w: Float64Array, n: number, v: number): number {
  const at = lowerBound(w, n, v);
  for (let k = n; k > at; k--) w[k] = w[k - 1];
  w[at] = v;
  return n + 1;
}

/** Removes the value at v's lower bound in the sorted w[0..n) (v itself, unless v is NaN: then the first, as a sorted list with splice does); returns the new count. */
function remove(w: Float64Array, n: number, v: number): number {
  const at = lowerBound(w, n, v);
  if (at >= n) return n;
  for (let k = at; k < n - 1; k++) w[k] = w[k + 1];
  return n - 1;
}

/** First index of w[0..n) whose value is not below v. */
function lowerBound(w: Float64Array, n: number, v: number): number {
  let lo = 0;
  let hi = n;
  while (lo < hi) {
    const mid = (lo + hi) >>> 1;
    if (w[mid] < v) lo = mid + 1;
    else hi = mid;
  }
  return lo;
}
