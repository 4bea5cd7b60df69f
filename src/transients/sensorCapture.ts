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
import { demodulateFixed, demodulateOrder } from './orderDemodulation.ts';
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

/** The shaft angle (revolutions) at data time tS, or NaN when unknown; null: not known yet. */
export type AngleAt = (tS: number) => number | null;

export interface OrderRow {
  tS: number;
  speedRpm: number;
  velocityRmsMmS: number;
  phaseDeg: number | null;
}

export class SensorCapture {
  readonly config: SensorConfig;
  readonly orderRows: OrderRow[][];
  readonly decayRows: Array<Array<[number, number, number]>>;
  private decimator: TriangleDecimator | null = null;
  private readonly minRateHz: number;
  readonly trackedOrders: TrackedOrder[];
  readonly trackedComponents: TrackedComponent[];
  private readonly windowS: number;
  private readonly stepS: number;
  /** Decimated samples with their angles; index 0 is at time baseS. */
  private x: number[] = [];
  private revs: number[] = [];
  private baseS = Number.NaN;
  private rateHz = 0;
  /** Samples [0, processed) have their angle. */
  private processed = 0;
  private nextOrderStepS = Number.NaN;
  private readonly nextDecayStepS: number[];
  private readonly unitsToMmS2: number;

  constructor(config: SensorConfig, orders: TrackedOrder[], components: TrackedComponent[], windowS: number, minRateHz: number) {
    this.config = config;
    this.trackedOrders = orders;
    this.trackedComponents = components;
    this.windowS = windowS;
    this.stepS = windowS / 4;
    this.minRateHz = minRateHz;
    this.orderRows = orders.map(() => []);
    this.decayRows = components.map(() => []);
    this.nextDecayStepS = components.map(() => Number.NaN);
    this.unitsToMmS2 = unitsToMmS2(config.units) * config.scale;
  }

  push(t0S: number, sampleRateHz: number, samples: Float32Array): void {
    if (!this.decimator || this.decimator.inputRateHz !== sampleRateHz) {
      this.forget();
      this.decimator = new TriangleDecimator(sampleRateHz, decimationFor(sampleRateHz, this.minRateHz));
      this.rateHz = this.decimator.outputRateHz;
    }
    this.decimator.push(samples, t0S, (tS, value) => {
      if (Number.isNaN(this.baseS)) {
        this.baseS = tS;
        this.nextOrderStepS = Math.ceil((tS + this.windowS / 2) / this.stepS) * this.stepS;
        this.trackedComponents.forEach((c, i) => {
          const step = c.windowS / 2;
          this.nextDecayStepS[i] = Math.ceil((tS + c.windowS / 2) / step) * step;
        });
      }
      this.x.push(value * this.unitsToMmS2);
    });
  }

  /** A gap or a reset upstream: history is meaningless across it. */
  forget(): void {
    this.decimator?.reset();
    this.decimator = null;
    this.x = [];
    this.revs = [];
    this.baseS = Number.NaN;
    this.processed = 0;
  }

  /** Gives pending samples up to `untilS` their angle, then measures every step now complete. */
  advanceTo(untilS: number, angleAt: AngleAt, phaseKnown: boolean): void {
    if (Number.isNaN(this.baseS)) return;
    while (this.processed < this.x.length) {
      const tS = this.baseS + this.processed / this.rateHz;
      if (tS > untilS) break;
      const rev = angleAt(tS);
      if (rev === null) break;
      this.revs.push(rev);
      this.processed++;
    }
    const endS = this.baseS + this.processed / this.rateHz;
    while (this.nextOrderStepS + this.windowS / 2 <= endS) {
      this.measureOrders(this.nextOrderStepS, phaseKnown);
      this.nextOrderStepS += this.stepS;
    }
    this.trackedComponents.forEach((c, i) => {
      while (this.nextDecayStepS[i] + c.windowS / 2 <= endS) {
        this.measureDecay(i, this.nextDecayStepS[i]);
        this.nextDecayStepS[i] += c.windowS / 2;
      }
    });
    this.trim();
  }

  private indexAt(tS: number): number {
    return Math.round((tS - this.baseS) * this.rateHz);
  }

  private measureOrders(centreS: number, phaseKnown: boolean): void {
    const from = this.indexAt(centreS - this.windowS / 2);
    const to = this.indexAt(centreS + this.windowS / 2);
    if (from < 0 || to > this.processed || to - from < 8) return;
    const spanRevs = this.revs[to - 1] - this.revs[from];
    if (!Number.isFinite(spanRevs) || spanRevs <= 0) return;
    const shaftHz = spanRevs / ((to - 1 - from) / this.rateHz);
    const decimator = this.decimator as TriangleDecimator;
    this.trackedOrders.forEach((order, i) => {
      const orderHz = order.multiple * shaftHz;
      if (orderHz >= 0.4 * this.rateHz) return;
      const [re, im] = demodulateOrder(this.x, this.revs, from, to, order.multiple);
      if (!Number.isFinite(re)) return;
      // Acceleration peak amplitude A (mm/s^2), phase lag phi; velocity = A / w, lagging 90 deg more.
      const accelPeak = Math.hypot(re, im) / decimator.gainAt(orderHz);
      const velocityRms = accelPeak / (2 * Math.PI * orderHz) / Math.SQRT2;
      const lagDeg = (((-Math.atan2(im, re) * 180) / Math.PI + 90) % 360 + 360) % 360;
      this.orderRows[i].push({ tS: centreS, speedRpm: shaftHz * 60, velocityRmsMmS: velocityRms, phaseDeg: phaseKnown ? lagDeg : null });
    });
  }

  private measureDecay(i: number, centreS: number): void {
    const c = this.trackedComponents[i];
    const from = this.indexAt(centreS - c.windowS / 2);
    const to = this.indexAt(centreS + c.windowS / 2);
    if (from < 0 || to > this.processed || to - from < 8) return;
    const [re, im] = demodulateFixed(this.x, from, to, c.fnHz, this.rateHz, this.baseS + from / this.rateHz);
    const gain = (this.decimator as TriangleDecimator).gainAt(c.fnHz);
    const velocityRms = Math.hypot(re, im) / gain / (2 * Math.PI * c.fnHz) / Math.SQRT2;
    const phaseDeg = (((-Math.atan2(im, re) * 180) / Math.PI) % 360 + 360) % 360;
    this.decayRows[i].push([centreS, velocityRms, phaseDeg]);
  }

  /** Drops samples no window will need again. */
  private trim(): void {
    let keepFromS = this.nextOrderStepS - this.windowS / 2;
    this.trackedComponents.forEach((c, i) => (keepFromS = Math.min(keepFromS, this.nextDecayStepS[i] - c.windowS / 2)));
    const drop = Math.min(this.processed, this.indexAt(keepFromS) - 1);
    if (drop < 4096) return;
    this.x.splice(0, drop);
    this.revs.splice(0, drop);
    this.processed -= drop;
    this.baseS += drop / this.rateHz;
  }

  /** Forgets measured rows older than `beforeS`. */
  dropRowsBefore(beforeS: number): void {
    for (const rows of this.orderRows) {
      let n = 0;
      while (n < rows.length && rows[n].tS < beforeS) n++;
      if (n > 0) rows.splice(0, n);
    }
    for (const rows of this.decayRows) {
      let n = 0;
      while (n < rows.length && rows[n][0] < beforeS) n++;
      if (n > 0) rows.splice(0, n);
    }
  }
}

function unitsToMmS2(units: SensorUnits): number {
  return units === 'g' ? G_M_S2 * 1000 : 1000;
}
