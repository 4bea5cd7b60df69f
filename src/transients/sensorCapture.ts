/**
 * One sensor's part of transient capture: a decimated copy of its signal with the shaft angle
 * at every sample, from which it measures each tracked order's complex amplitude and each
 * component's fixed-frequency amplitude at a regular step of data time.
 *
 * Samples arrive before the speed for their time is known (a spectral speed lags the data), so
 * they wait in `pending` until `advanceTo` says how far the speed reaches; only then do they get
 * their angle. Windows that touch a sample of unknown angle give no point.
 */
import type { SensorConfig, SensorUnits } from '../config/types.ts';
import { DueWindows } from './dueWindows.ts';
import { FloatQueue } from './floatQueue.ts';
import { RowTable } from './rowTable.ts';
import { demodulateFixed, fixedStep, hannWeights } from './orderDemodulation.ts';
import { appendOrderProducts, phasorPowers, PRODUCT_RUN, windowedAmplitudes } from './orderProducts.ts';
import type { AngleSource } from './shaftAngles.ts';
import { decimationFor, TriangleDecimator } from './triangleDecimator.ts';

/** Standard gravity, m/s^2 per g (exact, CGPM 1901). */
const G_M_S2 = 9.80665;

export interface TrackedOrder {
  id: string;
  multiple: number;
}

export interface TrackedComponent {
  id: string;
  fnHz: number;
  /** Window of the fixed-frequency envelope (s). */
  windowS: number;
}

/** A run of waiting samples' angles: scratch shared by every capture (filled and used within one call). */
const runRevs = new Float64Array(PRODUCT_RUN);

/** A step that fell due waits at most this long (s of data) before it is measured anyway. */
const MAX_WAIT_S = 1;

export class SensorCapture {
  readonly config: SensorConfig;
  /** Per order: t_s, speed_rpm, velocity_rms_mm_s, phase_deg (NaN: no phase). */
  readonly orderRows: RowTable[];
  /** Per component: t_s, velocity_rms_mm_s, phase_deg. */
  readonly decayRows: RowTable[];
  private decimator: TriangleDecimator | null = null;
  private readonly minRateHz: number;
  readonly trackedOrders: TrackedOrder[];
  readonly trackedComponents: TrackedComponent[];
  private readonly windowS: number;
  private readonly stepS: number;
  /** Decimated samples with their angles; index 0 is at time baseS. */
  private readonly x = new FloatQueue(1);
  private readonly revs = new FloatQueue(1);
  /**
   * Per order, x e^(-j 2 pi k theta) of every sample with an angle (NaN where it has none), re and
   * im interleaved: computed once a sample, though each sample serves four overlapping windows.
   */
  private readonly products: FloatQueue[];
  /** Per order, its multiple, and where that is a whole power of the 1X phasor that power (else 0). */
  private readonly multiples: number[];
  private readonly powers: Int32Array;
  /** Every queue above, for the steps that treat them alike, and the values each holds a sample. */
  private readonly allQueues: FloatQueue[];
  private readonly perSample: number[];
  /** One window's orders (those below 0.4 x the decimated rate) and, per order, its amplitude. */
  private readonly windowOrders: Int32Array;
  private readonly windowRe: Float64Array;
  private readonly windowIm: Float64Array;
  private baseS = Number.NaN;
  private rateHz = 0;
  /** Samples [0, processed) have their angle. */
  private processed = 0;
  /**
   * The product queues hold samples [productsFrom, productsDone): the products are worked out
   * only from the first window measured, and none is kept for a sample no window reads.
   */
  private productsFrom = 0;
  private productsDone = 0;
  /** How far index 0 has moved since the first sample (the due windows count from there). */
  private rebased = 0;
  /** Order windows, and per component decay windows, that fell due and wait to be measured. */
  private readonly orderDue = new DueWindows();
  private readonly decayDue: DueWindows[];
  private phaseKnown = false;
  /**
   * Samples [0, released) are no longer held: the queues start at index `released`. Memory is
   * given back as soon as no window needs a sample, while index 0 (and so baseS, from which
   * every time is worked out) moves only in the steps it always has, so the records do not
   * depend on how often memory is released.
   */
  private released = 0;
  /** The queues' first size: one order window of decimated samples. */
  private queueCapacity = 1;
  private nextOrderStepS = Number.NaN;
  private readonly nextDecayStepS: number[];
  /** Per component, at the decimated rate: its demodulation's phasor step and the decimator's gain. */
  private readonly decaySteps: Array<readonly [number, number]>;
  private readonly decayGains: Float64Array;
  private readonly unitsToMmS2: number;
  /** The decimator's outputs of one block (times, values), reused block after block. */
  private outTimes = new Float64Array(0);
  private outValues = new Float64Array(0);

  constructor(config: SensorConfig, orders: TrackedOrder[], components: TrackedComponent[], windowS: number, minRateHz: number) {
    this.config = config;
    this.trackedOrders = orders;
    this.trackedComponents = components;
    // Sized when the first block gives the decimated rate (push).
    this.products = orders.map(() => new FloatQueue(1));
    this.multiples = orders.map((o) => o.multiple);
    this.powers = phasorPowers(this.multiples);
    this.allQueues = [this.x, this.revs, ...this.products];
    this.perSample = this.allQueues.map((q) => (q === this.x || q === this.revs ? 1 : 2));
    this.windowOrders = new Int32Array(orders.length);
    this.windowRe = new Float64Array(orders.length);
    this.windowIm = new Float64Array(orders.length);
    this.windowS = windowS;
    this.stepS = windowS / 4;
    this.minRateHz = minRateHz;
    this.orderRows = orders.map(() => new RowTable(4));
    this.decayRows = components.map(() => new RowTable(3));
    this.nextDecayStepS = components.map(() => Number.NaN);
    this.decayDue = components.map(() => new DueWindows());
    this.decaySteps = components.map(() => [1, 0] as const);
    this.decayGains = new Float64Array(components.length);
    this.unitsToMmS2 = unitsToMmS2(config.units) * config.scale;
  }

  push(t0S: number, sampleRateHz: number, samples: Float32Array): void {
    if (!this.decimator || this.decimator.inputRateHz !== sampleRateHz) {
      this.forget();
      this.decimator = new TriangleDecimator(sampleRateHz, decimationFor(sampleRateHz, this.minRateHz));
      this.rateHz = this.decimator.outputRateHz;
      for (let i = 0; i < this.trackedComponents.length; i++) {
        this.decaySteps[i] = fixedStep(this.trackedComponents[i].fnHz, this.rateHz);
        this.decayGains[i] = this.decimator.gainAt(this.trackedComponents[i].fnHz);
      }
      // Sized for the longest window; a queue grows by half when it must (a speed that lags).
      this.queueCapacity = Math.ceil(this.windowS * this.rateHz);
      this.allQueues.forEach((q, i) => q.reset(this.perSample[i] * this.queueCapacity));
    }
    const most = this.decimator.mostOutputs(samples.length);
    if (this.outTimes.length < most) {
      this.outTimes = new Float64Array(most);
      this.outValues = new Float64Array(most);
    }
    const n = this.decimator.pushInto(samples, t0S, this.outTimes, this.outValues);
    if (n > 0 && Number.isNaN(this.baseS)) {
      const tS = this.outTimes[0];
      this.baseS = tS;
      this.nextOrderStepS = Math.ceil((tS + this.windowS / 2) / this.stepS) * this.stepS;
      for (let i = 0; i < this.trackedComponents.length; i++) {
        const step = this.trackedComponents[i].windowS / 2;
        this.nextDecayStepS[i] = Math.ceil((tS + this.trackedComponents[i].windowS / 2) / step) * step;
      }
    }
    const values = this.outValues;
    const scale = this.unitsToMmS2;
    const at = this.x.extend(n);
    const x = this.x.array;
    for (let i = 0; i < n; i++) x[at + i] = values[i] * scale;
  }

  /** A gap or a reset upstream: history is meaningless across it (the steps due are measured first). */
  forget(): void {
    if (!Number.isNaN(this.baseS)) this.measureDue(-Infinity);
    this.orderDue.clear();
    for (const d of this.decayDue) d.clear();
    this.productsFrom = 0;
    this.productsDone = 0;
    this.rebased = 0;
    this.decimator?.reset();
    this.decimator = null;
    for (const q of this.allQueues) q.clear();
    this.baseS = Number.NaN;
    this.processed = 0;
    this.released = 0;
  }

  /**
   * Gives pending samples up to `untilS` their angle and queues every step now complete (the
   * next steps move on as they fall due, whether measured at once or not). Steps centred before
   * `readFromS` are dropped unmeasured: no record will read them, and the caller never moves
   * that limit back. With `measure` the rest are measured now; without, they wait for
   * `measureDue`, at most MAX_WAIT_S, so that the samples they hold stay few.
   */
  advanceTo(untilS: number, angles: AngleSource, phaseKnown: boolean, readFromS = -Infinity, measure = true): void {
    if (Number.isNaN(this.baseS)) return;
    this.phaseKnown = phaseKnown;
    for (;;) {
      const count = Math.min(this.released + this.x.length - this.processed, PRODUCT_RUN);
      if (count <= 0) break;
      const n = angles.fill(this.baseS, this.rateHz, this.processed, count, untilS, runRevs);
      if (n > 0) {
        const at = this.revs.extend(n);
        const revs = this.revs.array;
        for (let i = 0; i < n; i++) revs[at + i] = runRevs[i];
        this.processed += n;
      }
      if (n < count) break;
    }
    const endS = this.baseS + this.processed / this.rateHz;
    while (this.nextOrderStepS + this.windowS / 2 <= endS) {
      this.queueOrders(this.nextOrderStepS);
      this.nextOrderStepS += this.stepS;
    }
    for (let i = 0; i < this.trackedComponents.length; i++) {
      const halfS = this.trackedComponents[i].windowS / 2;
      while (this.nextDecayStepS[i] + halfS <= endS) {
        this.queueDecay(i, this.nextDecayStepS[i]);
        this.nextDecayStepS[i] += halfS;
      }
    }
    this.measureDue(readFromS, measure ? Infinity : endS - MAX_WAIT_S);
    this.trim();
  }

  /**
   * Drops the due steps centred before `readFromS` (no record will read them), then measures
   * those centred before `beforeS`. The products are worked out here, from the first window
   * measured: those of samples before it are never read and only take their slots.
   */
  measureDue(readFromS: number, beforeS = Infinity): void {
    const orders = this.orderDue;
    orders.dropBefore(readFromS);
    if (orders.length > 0 && orders.centreS < beforeS) {
      this.computeProducts(orders.from - this.rebased);
      for (; orders.length > 0 && orders.centreS < beforeS; orders.shift()) this.measureOrders(orders.centreS, orders.from - this.rebased, orders.to - this.rebased);
    }
    for (let i = 0; i < this.decayDue.length; i++) {
      const d = this.decayDue[i];
      d.dropBefore(readFromS);
      for (; d.length > 0 && d.centreS < beforeS; d.shift()) this.measureDecay(i, d.centreS, d.from - this.rebased, d.to - this.rebased, d.firstS);
    }
  }

  /** Products of the samples from index `from` to those with an angle (those before it are let go). */
  private computeProducts(from: number): void {
    this.dropProductsBefore(Math.min(from, this.processed));
    while (this.productsDone < this.processed) {
      const n = Math.min(PRODUCT_RUN, this.processed - this.productsDone);
      const at = this.productsDone - this.released;
      const revs = this.revs.array.subarray(this.revs.offset + at, this.revs.offset + at + n);
      appendOrderProducts(this.x.array, this.x.offset + at, revs, n, this.multiples, this.powers, this.products);
      this.productsDone += n;
    }
  }

  /** Lets go of the products of samples before index `index`; none will be worked out for them. */
  private dropProductsBefore(index: number): void {
    if (index <= this.productsFrom) return;
    const held = Math.min(index, this.productsDone) - this.productsFrom;
    if (held > 0) {
      for (const q of this.products) {
        q.dropFront(2 * held);
        q.shrink(2 * this.queueCapacity);
      }
    }
    this.productsFrom = index;
    this.productsDone = Math.max(this.productsDone, index);
  }

  private indexAt(tS: number): number {
    return Math.round((tS - this.baseS) * this.rateHz);
  }

  /** An order window as it falls due: the samples it spans are fixed now, whenever it is measured. */
  private queueOrders(centreS: number): void {
    const from = this.indexAt(centreS - this.windowS / 2);
    const to = this.indexAt(centreS + this.windowS / 2);
    if (from < 0 || to > this.processed || to - from < 8) return;
    this.orderDue.push(centreS, from + this.rebased, to + this.rebased, Number.NaN);
  }

  /** A decay window as it falls due, with the time of its first sample (its phase reference). */
  private queueDecay(i: number, centreS: number): void {
    const c = this.trackedComponents[i];
    const from = this.indexAt(centreS - c.windowS / 2);
    const to = this.indexAt(centreS + c.windowS / 2);
    if (from < 0 || to > this.processed || to - from < 8) return;
    this.decayDue[i].push(centreS, from + this.rebased, to + this.rebased, this.baseS + from / this.rateHz);
  }

  private measureOrders(centreS: number, from: number, to: number): void {
    const phaseKnown = this.phaseKnown;
    const spanRevs = this.revs.at(to - 1 - this.released) - this.revs.at(from - this.released);
    if (!Number.isFinite(spanRevs) || spanRevs <= 0) return;
    const shaftHz = spanRevs / ((to - 1 - from) / this.rateHz);
    const decimator = this.decimator as TriangleDecimator;
    let count = 0;
    for (let i = 0; i < this.multiples.length; i++) if (this.multiples[i] * shaftHz < 0.4 * this.rateHz) this.windowOrders[count++] = i;
    const { w, sum } = hannWeights(to - from);
    windowedAmplitudes(w, sum, from - this.productsFrom, this.windowOrders, count, this.products, this.windowRe, this.windowIm);
    for (let o = 0; o < count; o++) {
      const i = this.windowOrders[o];
      const orderHz = this.multiples[i] * shaftHz;
      const re = this.windowRe[i];
      const im = this.windowIm[i];
      if (!Number.isFinite(re)) continue;
      // Acceleration peak amplitude A (mm/s^2), phase lag phi; velocity = A / w, lagging 90 deg more.
      const accelPeak = Math.hypot(re, im) / decimator.gainAt(orderHz);
      const velocityRms = accelPeak / (2 * Math.PI * orderHz) / Math.SQRT2;
      const lagDeg = (((-Math.atan2(im, re) * 180) / Math.PI + 90) % 360 + 360) % 360;
      this.orderRows[i].push(centreS, shaftHz * 60, velocityRms, phaseKnown ? lagDeg : Number.NaN);
    }
  }

  private measureDecay(i: number, centreS: number, from: number, to: number, firstS: number): void {
    const c = this.trackedComponents[i];
    const { data, offset } = this.x.view();
    const at = offset - this.released;
    const [re, im] = demodulateFixed(data, at + from, at + to, c.fnHz, this.rateHz, firstS, this.decaySteps[i]);
    const gain = this.decayGains[i];
    const velocityRms = Math.hypot(re, im) / gain / (2 * Math.PI * c.fnHz) / Math.SQRT2;
    const phaseDeg = (((-Math.atan2(im, re) * 180) / Math.PI) % 360 + 360) % 360;
    this.decayRows[i].push(centreS, velocityRms, phaseDeg);
  }

  /**
   * Releases samples no window will need again, at once: those before the next steps to fall
   * due and before the due steps still waiting. Index 0 moves on (baseS with it) only once 4096
   * are behind the next steps to fall due, as it always has (see `released`), whether or not
   * the steps before them were measured yet.
   */
  private trim(): void {
    let nextFromS = this.nextOrderStepS - this.windowS / 2;
    for (let i = 0; i < this.trackedComponents.length; i++) nextFromS = Math.min(nextFromS, this.nextDecayStepS[i] - this.trackedComponents[i].windowS / 2);
    const rebase = Math.min(this.processed, this.indexAt(nextFromS) - 1);
    let drop = rebase;
    if (this.orderDue.length > 0) drop = Math.min(drop, this.orderDue.from - this.rebased - 1);
    for (const d of this.decayDue) if (d.length > 0) drop = Math.min(drop, d.from - this.rebased - 1);
    if (drop > this.released) {
      const n = drop - this.released;
      for (const q of [this.x, this.revs]) {
        q.dropFront(n);
        q.shrink(this.queueCapacity);
      }
      this.released = drop;
    }
    this.dropProductsBefore(drop);
    if (rebase < 4096) return;
    this.processed -= rebase;
    this.released -= rebase;
    this.productsFrom -= rebase;
    this.productsDone -= rebase;
    this.rebased += rebase;
    this.baseS += rebase / this.rateHz;
  }

  /** Doubles this sensor holds in memory: sample queues and measured rows. */
  get heldDoubles(): { samples: number; rows: number } {
    let samples = 0;
    for (const q of this.allQueues) samples += q.capacity;
    let rows = 0;
    for (const t of [...this.orderRows, ...this.decayRows]) rows += t.capacity;
    return { samples, rows };
  }

  /** Forgets measured rows older than `beforeS`, and the due steps that would have given them. */
  dropRowsBefore(beforeS: number): void {
    this.orderDue.dropBefore(beforeS);
    for (const d of this.decayDue) d.dropBefore(beforeS);
    for (const rows of this.orderRows) rows.dropBefore(beforeS);
    for (const rows of this.decayRows) rows.dropBefore(beforeS);
  }
}

function unitsToMmS2(units: SensorUnits): number {
  return units === 'g' ? G_M_S2 * 1000 : 1000;
}
