/**
 * Transient capture for one asset: watches the speed for run-ups and coast-downs and, for each
 * one, records every tracked order's amplitude (and phase, with a once-per-rev tach) against
 * speed, and each component's fixed-frequency envelope at its fn, from which free decays are
 * read. Pure and on event time like the engine that drives it:
 *
 *   engine ingest  -> pushSamples (each sensor, raw blocks)   -> decimated, waiting for angles
 *   tach points    -> pushRevolution                          -> shaft angle between marks
 *   decision steps -> step(tS, rpm, speedAt)                  -> angles, order and decay rows,
 *                                                                sweeps, transient records
 *
 * Without a tach the shaft angle is the integral of the known speed; its slow error cancels
 * between the data and the model fitted to them (both are demodulated against the same angle),
 * but no phase is reported, since it would have no reference.
 */
import type { AssetConfig } from '../config/types.ts';
import { SensorCapture, type TrackedComponent, type TrackedOrder } from './sensorCapture.ts';
import { IntegratedAngle, MarkAngles, type SpeedAtFn } from './shaftAngles.ts';
import { SweepDetector, type Sweep } from './sweepDetector.ts';
import type { DecayTrack, OrderTrack, TransientRecord } from './transientRecord.ts';
import { DEFAULT_TRANSIENT_SETTINGS, type TransientSettings } from './transientSettings.ts';

/** Revolutions of the slowest shaft speed in one order window: keeps neighbouring orders apart. */
const WINDOW_REVS = 3;
/** The decimated rate is at least this many times the highest frequency tracked. */
const RATE_PER_TOP_HZ = 10;
/** Free decays are followed for this many time constants after a sweep ends (at most 10 s). */
const DECAY_TAIL_TAUS = 5;

export type { SpeedAtFn };

export class TransientCapture {
  readonly windowS: number;
  private readonly asset: AssetConfig;
  private readonly settings: TransientSettings;
  private readonly sensors: SensorCapture[];
  private readonly byChannel = new Map<number, SensorCapture>();
  private readonly detector: SweepDetector;
  private readonly phaseKnown: boolean;
  private readonly useMarks: boolean;
  private readonly tailS: number;
  private readonly pending: Sweep[] = [];
  /** The tach's once-per-rev marks (used with marks). */
  private readonly marks: MarkAngles;
  /** Per sensor: the running angle integral (without marks). */
  private readonly integrators: IntegratedAngle[];
  private lastStepS = Number.NaN;
  private speedSource = '';

  constructor(asset: AssetConfig, settings: TransientSettings = DEFAULT_TRANSIENT_SETTINGS, options: { speedSeries?: boolean } = {}) {
    this.asset = asset;
    this.settings = settings;
    const [minRpm, topRpm] = asset.speed.rangeRpm;
    this.windowS = Math.min(2, Math.max(0.1, (WINDOW_REVS * 60) / minRpm));
    this.useMarks = asset.speed.source === 'tach' && !options.speedSeries;
    this.phaseKnown = this.useMarks && asset.speed.pulsesPerRev === 1;
    this.detector = new SweepDetector(topRpm, settings);
    let longestTauS = 0;
    this.sensors = asset.sensors.map((sensor) => {
      const components = asset.components.filter((c) => c.sensorIds.includes(sensor.id));
      const orderIds = new Set(components.flatMap((c) => c.orderIds));
      const orders: TrackedOrder[] = asset.orders.filter((o) => orderIds.has(o.id)).map((o) => ({ id: o.id, multiple: o.multiple }));
      const tracked: TrackedComponent[] = components.map((c) => {
        const tauS = c.q / (Math.PI * c.fnHz);
        longestTauS = Math.max(longestTauS, tauS);
        return { id: c.id, fnHz: c.fnHz, windowS: Math.min(this.windowS, Math.max(tauS / 2, 4 / c.fnHz)) };
      });
      let topHz = 0;
      for (const o of orders) topHz = Math.max(topHz, (o.multiple * topRpm * 1.1) / 60);
      for (const c of tracked) topHz = Math.max(topHz, c.fnHz * 1.5);
      const capture = new SensorCapture(sensor, orders, tracked, this.windowS, RATE_PER_TOP_HZ * Math.max(topHz, 1));
      this.byChannel.set(sensor.channel, capture);
      return capture;
    });
    this.marks = new MarkAngles(asset.speed.maxAgeS);
    this.integrators = this.sensors.map(() => new IntegratedAngle());
    this.tailS = Math.min(10, Math.max(this.windowS, DECAY_TAIL_TAUS * longestTauS));
  }

  /** Per sensor, the doubles its capture holds in memory (sample queues, measured rows). */
  heldDoubles(): Array<{ sensor: string; samples: number; rows: number }> {
    return this.sensors.map((s) => ({ sensor: s.config.id, ...s.heldDoubles }));
  }

  pushSamples(channel: number, t0S: number, sampleRateHz: number, samples: Float32Array): void {
    this.byChannel.get(channel)?.push(t0S, sampleRateHz, samples);
  }

  /** A gap on a channel: its history is cut there. */
  resetChannel(channel: number): void {
    const capture = this.byChannel.get(channel);
    if (capture) {
      capture.measureDue(this.firstReadS());
      capture.forget();
      this.integrators[this.sensors.indexOf(capture)].reset();
    } else {
      // The tach restarted: revolution numbering cannot be carried across.
      this.marks.clear();
    }
  }

  /** One completed revolution from the tach, ending at `tS` (a once-per-rev mark). */
  pushRevolution(tS: number, rpm: number): void {
    this.marks.pushRevolution(tS, rpm);
  }

  /**
   * A decision step: speeds are known up to `tS`. Returns the transient records completed now.
   */
  step(tS: number, rpm: number | null, speedAt: SpeedAtFn, speedSource: string): TransientRecord[] {
    this.speedSource = speedSource;
    const readFromS = this.firstReadS();
    for (let i = 0; i < this.sensors.length; i++) {
      const integrator = this.integrators[i];
      integrator.speedAt = speedAt;
      this.sensors[i].advanceTo(tS, this.useMarks ? this.marks : integrator, this.phaseKnown, readFromS, false);
    }
    const sweep = this.detector.step(tS, rpm);
    if (sweep) this.pending.push(sweep);
    this.lastStepS = tS;
    // Rows are read only for a sweep: measured while one is under way or waits for its tail.
    if (this.detector.inProgress || this.pending.length > 0) this.measureDue();
    return this.release(false);
  }

  /** The data ended: reports a sweep in progress with what there is. */
  finish(): TransientRecord[] {
    const sweep = this.detector.end();
    if (sweep) this.pending.push(sweep);
    this.measureDue();
    return this.release(true);
  }

  /**
   * The earliest data time a record still to come can read: a window before the start of the
   * earliest sweep it may cover. Sweeps start at the detector's anchor or later (at a later
   * step where it has none), or are waiting for their tail; the limit only moves later, so the
   * rows and products before it are never measured (most of a steady run's data).
   */
  private firstReadS(): number {
    let fromS = this.detector.anchorS ?? this.lastStepS;
    for (const p of this.pending) fromS = Math.min(fromS, p.startS);
    return Number.isNaN(fromS) ? -Infinity : fromS - this.windowS;
  }

  private measureDue(): void {
    const fromS = this.firstReadS();
    for (const s of this.sensors) s.measureDue(fromS);
  }

  private release(all: boolean): TransientRecord[] {
    const out: TransientRecord[] = [];
    while (this.pending.length > 0) {
      const sweep = this.pending[0];
      if (!all && this.lastStepS < sweep.endS + this.tailS + this.windowS) break;
      this.pending.shift();
      out.push(this.record(sweep));
    }
    // Keep rows for a sweep in progress (up to maxSweepS) and for those waiting on their tail.
    const inProgress = this.detector.inProgress;
    let keepFromS = this.lastStepS - this.settings.maxSweepS;
    if (!inProgress) keepFromS = Math.max(keepFromS, this.lastStepS - this.settings.holdS - 2 * this.windowS - this.tailS);
    for (const p of this.pending) keepFromS = Math.min(keepFromS, p.startS - this.windowS);
    if (Number.isFinite(keepFromS)) for (const s of this.sensors) s.dropRowsBefore(keepFromS);
    return out;
  }

  private record(sweep: Sweep): TransientRecord {
    const fromS = sweep.startS - this.windowS / 2;
    const toS = sweep.endS + this.tailS;
    const orders: OrderTrack[] = [];
    const decays: DecayTrack[] = [];
    for (const s of this.sensors) {
      s.orderRows.forEach((rows, i) => {
        const points: Array<[number, number, number, number | null]> = [];
        for (let r = 0; r < rows.length; r++) {
          const tS = rows.at(r, 0);
          if (!(tS >= fromS && tS <= sweep.endS + this.windowS / 2)) continue;
          const phase = rows.at(r, 3);
          points.push([tS, rows.at(r, 1), rows.at(r, 2), Number.isNaN(phase) ? null : phase]);
        }
        if (points.length === 0) return;
        const order = s.trackedOrders[i];
        orders.push({ order: order.id, multiple: order.multiple, sensor: s.config.id, columns: ['t_s', 'speed_rpm', 'velocity_rms_mm_s', 'phase_deg'], points });
      });
      s.decayRows.forEach((rows, i) => {
        const points: Array<[number, number, number]> = [];
        for (let r = 0; r < rows.length; r++) {
          const tS = rows.at(r, 0);
          if (tS >= fromS && tS <= toS) points.push([tS, rows.at(r, 1), rows.at(r, 2)]);
        }
        if (points.length === 0) return;
        const c = s.trackedComponents[i];
        decays.push({ component: c.id, sensor: s.config.id, freq_hz: c.fnHz, window_s: c.windowS, columns: ['t_s', 'velocity_rms_mm_s', 'phase_deg'], points });
      });
    }
    return {
      kind: 'transient',
      asset: this.asset.id,
      direction: sweep.direction,
      t_start_s: sweep.startS,
      t_end_s: sweep.endS,
      speed_from_rpm: sweep.fromRpm,
      speed_to_rpm: sweep.toRpm,
      rate_rpm_s: (sweep.toRpm - sweep.fromRpm) / (sweep.endS - sweep.startS),
      ended_by: sweep.endedBy,
      speed_source: this.speedSource,
      phase_reference: this.phaseKnown ? 'once-per-rev mark' : null,
      window_s: this.windowS,
      step_s: this.windowS / 4,
      resolution: this.resolution(orders),
      orders,
      decays,
    };
  }

  private resolution(orders: OrderTrack[]): TransientRecord['resolution'] {
    let step = 0;
    for (const o of orders) for (let i = 1; i < o.points.length; i++) step = Math.max(step, Math.abs(o.points[i][1] - o.points[i - 1][1]));
    let narrowest: { rpm: number; component: string; order: string } | null = null;
    for (const c of this.asset.components) {
      for (const id of c.orderIds) {
        const order = this.asset.orders.find((o) => o.id === id);
        if (!order) continue;
        const rpm = ((c.bandHz[1] - c.bandHz[0]) * 60) / order.multiple;
        if (!narrowest || rpm < narrowest.rpm) narrowest = { rpm, component: c.id, order: id };
      }
    }
    return { speed_step_rpm: step, narrowest_band_rpm: narrowest?.rpm ?? null, component: narrowest?.component ?? null, order: narrowest?.order ?? null };
  }
}
