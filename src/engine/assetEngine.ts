/**
 * The resonance-dwell engine of one asset: samples and speeds in, alarm and status records out.
 *
 * Pure and on event time: it takes typed arrays with the timestamps of their first samples and
 * returns records; it has no clock, broker, file or logger. Replay and the live agent drive the
 * very same engine, so the same data gives the same alarms however fast it arrives.
 *
 * Data path (ISO 13374 stages, in the order the folders of src/ read):
 *   sensor channels -> RollingSpectrum (zoom by decimation, Hann, averaging)
 *                   -> velocity spectrum -> order amplitudes, broadband severity
 *                   -> (speed source `spectrum`) tachless 1X estimate
 *   tach channel    -> TachSpeed (one point per revolution)
 *   speed records   -> SpeedTrack (interpolation, staleness, confidence)
 *   every decision step (decision_step_s of data time), for each (component, order) pair:
 *       order frequency from the speed -> band position -> DwellAlarm -> alarm records
 *
 * Decisions run up to a watermark: the earliest time every bound channel has reached, held back
 * until speed evidence for that time can have arrived (a spectral speed lags by half a frame,
 * a speed topic by up to max_age_s). No decision is ever taken on a speed we do not know.
 */
import {
  adviceFor,
  type ActiveAlarmEntry,
  type AlarmRecord,
  type AmplitudeEvidence,
  type EngineRecord,
  type ExposureEntry,
  type OrderPosition,
  type OutsideBandReference,
  type StatusRecord,
  type SummaryRecord,
} from '../advisory/records.ts';
import type { AssetConfig, ComponentConfig, OrderConfig } from '../config/types.ts';
import { bandPosition, deadbandHz, separationPct, type BandPosition } from '../detection/bandPosition.ts';
import { DwellAlarm, type DwellEvent, type DwellSnapshot } from '../detection/dwellAlarm.ts';
import { Exposure } from '../detection/exposure.ts';
import type { RealFft } from '../manipulation/realFft.ts';
import type { SpectrumFrame } from '../manipulation/rollingSpectrum.ts';
import { estimateSpeedFromSpectrum } from '../manipulation/speedFromSpectrum.ts';
import { TachSpeed } from '../manipulation/speedFromTach.ts';
import type { SpeedPoint } from '../manipulation/speedPoint.ts';
import { SpeedAverage } from '../manipulation/speedAverage.ts';
import { SpeedTrack } from '../manipulation/speedTrack.ts';
import { SensorAnalysis } from './sensorAnalysis.ts';

/**
 * Decision times are start + k x step in floating point; records carry them rounded to the
 * microsecond so that 55.900000000000006 reads 55.9 (a microsecond is far below any delay).
 */
function roundTimeS(tS: number): number {
  return Math.round(tS * 1e6) / 1e6;
}

/** Revolutions in each tach speed point (see speedAverage.ts for why). */
const TACH_AVERAGE_REVS = 4;

/**
 * What the engine must remember to carry on after a restart or a reload of the map: the alarm
 * state and exposure of each (component, order) pair and component, the decision clock, and
 * where the data had got to. Signal history (spectra, tach edges) is not kept: it rebuilds
 * within one averaging span. Each entry carries a signature of the configuration it was made
 * under; a changed component, order or alarm setting starts afresh instead of inheriting.
 */
export interface EngineSnapshot {
  version: 1;
  asset: string;
  /** Event time just after the last sample seen on any bound channel. */
  dataEndS: number | null;
  startS: number | null;
  nextDecisionS: number | null;
  nextStatusS: number | null;
  lastDecisionS: number | null;
  counts: { raise: number; escalate: number; clear: number };
  speedStats: { knownS: number; unknownS: number; minRpm: number | null; maxRpm: number | null };
  outageS: number;
  pairs: Array<{ key: string; signature: string; dwell: DwellSnapshot; cyclesInDwell: number; outside: OutsideBandReference | null }>;
  exposure: Array<{ component: string; signature: string; secondsInBand: number; cycles: number }>;
}

export interface EngineOptions {
  /** Emit a status record every this many seconds of data time (0 or absent: never). */
  statusEveryS?: number;
  /**
   * A known speed series (replay `--speed`): replaces the map's speed source for this run.
   * Points must be sorted by time.
   */
  speedSeries?: SpeedPoint[];
}

export interface EngineDeps {
  /** One real FFT of the given size; the engine shares it between sensors (calls are sequential). */
  fft: RealFft;
}

interface PairState {
  component: ComponentConfig;
  order: OrderConfig;
  orderIndex: number;
  deadbandHz: number;
  speedBandRpm: [number, number];
  alarm: DwellAlarm;
  cyclesInDwell: number;
  outside: OutsideBandReference | null;
  lastPosition: BandPosition;
}

interface ChannelWatermark {
  channel: number;
  /** Event time just after the last sample received on this channel. */
  endS: number;
  /** The latest stretch with no data on this channel, [from, to), or null. */
  gap: [number, number] | null;
}

/**
 * Slack (s) when comparing event times. Live timestamps are epoch seconds (about 1.8e9), where
 * one step of a double is 2.4e-7 s: a block's end computed as t + n / fs can fall a rounding
 * step short of the decision time start + k x step it reaches. A microsecond covers that and is
 * far below any sample period qband handles.
 */
const TIME_EPS_S = 1e-6;

/** A block starting later than the channel's end by more than this (s) opens a gap. */
const GAP_TOLERANCE_S = 0.05;

export class AssetEngine {
  readonly asset: AssetConfig;
  private readonly options: EngineOptions;
  private readonly sensors: SensorAnalysis[];
  private readonly sensorsByChannel = new Map<number, SensorAnalysis>();
  private readonly sensorsById = new Map<string, SensorAnalysis>();
  private readonly pairs: PairState[];
  private readonly exposures: Map<string, Exposure>;
  private readonly track: SpeedTrack;
  private tach: TachSpeed | null = null;
  private readonly tachAverage = new SpeedAverage(TACH_AVERAGE_REVS);
  private readonly watermarks: ChannelWatermark[];
  private readonly speedSeries: SpeedTrack | null;
  /** Latest data time for which the speed source has said something (spectral or topic). */
  private speedEvidenceS = Number.NEGATIVE_INFINITY;
  private nextDecisionS: number | null = null;
  private nextStatusS: number | null = null;
  private startS: number | null = null;
  private lastDecisionS: number | null = null;
  private spectraCount = 0;
  private shedding = false;
  private shedBlockCount = 0;
  /** Data time skipped because no channel had data (outages, restarts). */
  private outageS = 0;
  /** Spectra skipped because a sample in them was not finite. */
  private nonFiniteSpectra = 0;
  /** Set by restore(): where the previous run's data ended, so the first block shows the gap. */
  private resumedFromS: number | null = null;
  private readonly pendingFrames: Array<{ sensor: SensorAnalysis; frame: SpectrumFrame }> = [];
  private readonly counts = { raise: 0, escalate: 0, clear: 0 };
  private readonly speedStats = { knownS: 0, unknownS: 0, minRpm: Infinity, maxRpm: -Infinity };
  private readonly warnings = new Set<string>();
  private frameS = 0;
  private binHz = 0;
  private analysisRateHz = 0;

  constructor(asset: AssetConfig, deps: EngineDeps, options: EngineOptions = {}) {
    if (deps.fft.size !== asset.analysis.frameSize) {
      throw new Error(`engine FFT size ${deps.fft.size} differs from the map's frame size ${asset.analysis.frameSize}`);
    }
    this.asset = asset;
    this.options = options;
    this.track = new SpeedTrack({ maxAgeS: asset.speed.maxAgeS, minConfidence: asset.speed.minConfidence });
    this.speedSeries = null;
    if (options.speedSeries) {
      const series = new SpeedTrack({
        maxAgeS: asset.speed.maxAgeS,
        minConfidence: 0,
        capacity: options.speedSeries.length + 1,
      });
      for (const p of options.speedSeries) series.add(p);
      this.speedSeries = series;
    }
    this.sensors = asset.sensors.map((config) => new SensorAnalysis(config, asset, deps.fft));
    for (const s of this.sensors) {
      this.sensorsByChannel.set(s.config.channel, s);
      this.sensorsById.set(s.config.id, s);
    }
    const orderIndex = new Map(asset.orders.map((o, i) => [o.id, i]));
    this.pairs = [];
    for (const component of asset.components) {
      for (const id of component.orderIds) {
        const i = orderIndex.get(id) as number;
        const order = asset.orders[i];
        const db = deadbandHz(component.fnHz, asset.alarm.deadbandPct);
        this.pairs.push({
          component,
          order,
          orderIndex: i,
          deadbandHz: db,
          speedBandRpm: [(component.bandHz[0] * 60) / order.multiple, (component.bandHz[1] * 60) / order.multiple],
          alarm: new DwellAlarm(asset.alarm),
          cyclesInDwell: 0,
          outside: null,
          lastPosition: 'unknown',
        });
      }
    }
    this.exposures = new Map(asset.components.map((c) => [c.id, new Exposure()]));
    const channels = asset.sensors.map((s) => s.channel);
    if (asset.speed.source === 'tach' && !options.speedSeries) channels.push(asset.speed.channel as number);
    this.watermarks = channels.map((channel) => ({ channel, endS: Number.NEGATIVE_INFINITY, gap: null }));
  }

  /** Channel numbers the engine needs data from (sensors, and the tach when it is the speed source). */
  get boundChannels(): number[] {
    return this.watermarks.map((w) => w.channel);
  }

  /**
   * Feed a block of one channel: `samples[0]` was taken at event time `t0S`. Returns the records
   * that the data now complete. Channels not bound in the map are ignored.
   */
  pushChannel(channel: number, t0S: number, sampleRateHz: number, samples: Float32Array): EngineRecord[] {
    this.ingest(channel, t0S, sampleRateHz, samples);
    return this.advance();
  }

  /** Feed a block of several channels taken together (index = channel number). */
  pushBlock(t0S: number, sampleRateHz: number, channels: readonly Float32Array[]): EngineRecord[] {
    for (const w of this.watermarks) {
      const samples = channels[w.channel];
      if (samples) this.ingest(w.channel, t0S, sampleRateHz, samples);
    }
    return this.advance();
  }

  /** Add a speed record (speed source `topic`): points may arrive out of step with the samples. */
  pushSpeed(point: SpeedPoint): EngineRecord[] {
    this.track.add(point);
    this.speedEvidenceS = Math.max(this.speedEvidenceS, point.tS);
    return this.advance();
  }

  private ingest(channel: number, t0S: number, sampleRateHz: number, samples: Float32Array): void {
    if (this.startS === null) {
      this.startS = t0S;
      this.nextDecisionS = t0S + this.asset.analysis.decisionStepS;
      if (this.options.statusEveryS) this.nextStatusS = t0S + this.options.statusEveryS;
    }
    const w = this.watermarks.find((x) => x.channel === channel);
    if (!w) return;
    const resumeFromS = Number.isFinite(w.endS) ? w.endS : this.resumedFromS;
    if (resumeFromS !== null && t0S > resumeFromS + Math.max(GAP_TOLERANCE_S, 2 / sampleRateHz)) {
      // Data stopped and came back: history across the gap is meaningless.
      w.gap = [resumeFromS, t0S];
      this.resetChannel(channel);
    }
    w.endS = Math.max(w.endS, t0S + samples.length / sampleRateHz);
    const sensor = this.sensorsByChannel.get(channel);
    if (sensor) {
      this.feedSensor(sensor, t0S, sampleRateHz, samples);
      return;
    }
    if (!this.tach) {
      this.tach = new TachSpeed({
        sampleRateHz,
        pulsesPerRev: this.asset.speed.pulsesPerRev,
        rangeRpm: this.asset.speed.rangeRpm,
      });
    }
    for (const rev of this.tach.push(samples, t0S)) {
      const p = this.tachAverage.push(rev);
      this.track.add(p);
      this.speedEvidenceS = Math.max(this.speedEvidenceS, p.tS);
    }
  }

  /**
   * Overload rule, first stage: while set, sensors skip their spectra (the costly part) unless
   * a spectrum gives the speed. Speed, dwell decisions and exposure go on exactly; order
   * amplitudes and severity are not measured meanwhile (the evidence of alarms raised then is
   * null) and each spectrum restarts when shedding ends.
   */
  set shedSpectra(on: boolean) {
    if (on === this.shedding) return;
    this.shedding = on;
    if (!on) return;
    for (const sensor of this.sensors) {
      if (this.isSpeedSensor(sensor)) continue;
      sensor.forget();
      this.dropPendingFrames(sensor);
    }
  }

  get shedSpectra(): boolean {
    return this.shedding;
  }

  /** Sample blocks whose spectra were skipped by the overload rule. */
  get shedBlocks(): number {
    return this.shedBlockCount;
  }

  private isSpeedSensor(sensor: SensorAnalysis): boolean {
    return this.asset.speed.source === 'spectrum' && !this.speedSeries && this.asset.speed.sensor === sensor.config.id;
  }

  private feedSensor(sensor: SensorAnalysis, t0S: number, sampleRateHz: number, samples: Float32Array): void {
    if (this.shedding && !this.isSpeedSensor(sensor)) {
      this.shedBlockCount++;
      return;
    }
    const { frames, builtAtHz } = sensor.push(t0S, sampleRateHz, samples);
    if (builtAtHz !== null) {
      this.analysisRateHz = builtAtHz;
      this.frameS = this.asset.analysis.frameSize / builtAtHz;
      this.binHz = builtAtHz / this.asset.analysis.frameSize;
      this.checkResolution();
    }
    for (const frame of frames) {
      this.estimateSpeed(sensor, frame);
      this.queueFrame(sensor, frame);
    }
  }

  private checkResolution(): void {
    for (const c of this.asset.components) {
      const widthHz = c.bandHz[1] - c.bandHz[0];
      if (this.binHz > widthHz / 2) {
        this.warnings.add(
          `spectral line spacing ${this.binHz.toFixed(3)} Hz is coarse against the ${widthHz.toFixed(3)} Hz band of ${c.id}: amplitudes near it are approximate (raise analysis.frame_size or decimation)`,
        );
      }
    }
  }

  /** An averaged spectrum describes the whole span of its frames; its time is the span's middle. */
  private frameCentreS(frame: SpectrumFrame): number {
    return frame.tEndS - this.averagingSpanS(frame.averagedFrames) / 2;
  }

  /** Tachless speed: estimated as soon as a spectrum exists, since decisions wait for it. */
  private estimateSpeed(sensor: SensorAnalysis, frame: SpectrumFrame): void {
    if (this.asset.speed.source !== 'spectrum' || this.speedSeries || this.asset.speed.sensor !== sensor.config.id) return;
    const centreS = this.frameCentreS(frame);
    const estimate = estimateSpeedFromSpectrum(frame.amplitude, frame.binHz, this.asset.speed.rangeRpm);
    if (estimate.rpm !== null) {
      this.track.add({ tS: centreS, rpm: estimate.rpm, confidence: estimate.confidence, source: 'spectrum' });
    }
    this.speedEvidenceS = Math.max(this.speedEvidenceS, centreS);
  }

  /**
   * Spectra are evaluated (orders, severity) in time order inside the decision loop, once every
   * channel and the speed have reached the frame's end: the result then does not depend on the
   * order in which channels or blocks arrived.
   */
  private queueFrame(sensor: SensorAnalysis, produced: SpectrumFrame): void {
    // The spectrum may reuse its output arrays on its next push; a queued frame keeps a copy.
    const frame = { ...produced, amplitude: produced.amplitude.slice() };
    const q = this.pendingFrames;
    let i = q.length;
    while (i > 0 && q[i - 1].frame.tEndS > frame.tEndS) i--;
    q.splice(i, 0, { sensor, frame });
  }

  private dropPendingFrames(sensor: SensorAnalysis): void {
    this.pendingFrames.splice(0, this.pendingFrames.length, ...this.pendingFrames.filter((f) => f.sensor !== sensor));
  }

  private evaluateFramesUpTo(tS: number): void {
    const q = this.pendingFrames;
    let n = 0;
    while (n < q.length && q[n].frame.tEndS <= tS + TIME_EPS_S) {
      this.evaluateFrame(q[n].sensor, q[n].frame);
      n++;
    }
    if (n > 0) q.splice(0, n);
  }

  private evaluateFrame(sensor: SensorAnalysis, frame: SpectrumFrame): void {
    this.spectraCount++;
    const spanS = this.averagingSpanS(frame.averagedFrames);
    const centreS = frame.tEndS - spanS / 2;
    // Order amplitudes are read at the speed of the span's middle, and only when the speed was
    // known over the whole span (its start, middle and end).
    const speed = this.speedAt(centreS);
    const spanStart = this.speedAt(frame.tEndS - spanS);
    const spanEnd = this.speedAt(frame.tEndS);
    const known = speed.rpm !== null && spanStart.rpm !== null && spanEnd.rpm !== null;
    const rpms = known ? [speed.rpm as number, spanStart.rpm as number, spanEnd.rpm as number] : [];
    const shaftHz = known ? (speed.rpm as number) / 60 : null;
    const driftShaftHz = known ? (Math.max(...rpms) - Math.min(...rpms)) / 60 : 0;
    if (!sensor.measure(frame, shaftHz, driftShaftHz, (m) => this.warnings.add(m))) {
      this.nonFiniteSpectra++;
      return;
    }
    if (shaftHz === null || speed.rpm === null) return;
    // Remember each order's amplitude outside each band as the reference for in-band evidence.
    for (const pair of this.pairs) {
      if (!pair.component.sensorIds.includes(sensor.config.id)) continue;
      const amplitude = sensor.orderAmplitude[pair.orderIndex];
      if (!Number.isFinite(amplitude)) continue;
      const orderHz = pair.order.multiple * shaftHz;
      if (bandPosition(orderHz, pair.component.bandHz, pair.deadbandHz) === 'outside') {
        pair.outside = { velocity_rms_mm_s: amplitude, speed_rpm: speed.rpm, t_s: centreS };
      }
    }
  }

  /** Data time covered by an average of `frames` frames: the first one's start to the last one's end. */
  private averagingSpanS(frames: number = this.asset.analysis.averages): number {
    return this.frameS * (1 + (frames - 1) * (1 - this.asset.analysis.overlap));
  }

  private speedAt(tS: number) {
    return (this.speedSeries ?? this.track).at(tS);
  }

  /** How far decisions may go: all bound channels there, and speed evidence had time to arrive. */
  private decisionWatermarkS(): number {
    let sampleS = Number.POSITIVE_INFINITY;
    for (const w of this.watermarks) sampleS = Math.min(sampleS, w.endS);
    if (!Number.isFinite(sampleS)) return sampleS;
    if (this.speedSeries) return sampleS;
    // Wait until the speed source has spoken for the decision time, so a decision never rests
    // on a speed point that is merely late: a tach point comes once its revolution has been
    // confirmed by the next pulse, a spectral speed at the middle of an averaging span (half a
    // span plus a hop behind the data), a speed topic up to max_age_s late. Wait that long at
    // most, then decide with what there is (which may be "unknown").
    const hopS = this.frameS * (1 - this.asset.analysis.overlap);
    const waitS =
      this.asset.speed.source === 'spectrum' && this.frameS > 0
        ? this.averagingSpanS() / 2 + hopS
        : this.asset.speed.maxAgeS;
    return Math.min(sampleS, Math.max(this.speedEvidenceS, sampleS - waitS));
  }

  /**
   * Forget a channel's signal history (spectrum, tach edges) after a gap or a discontinuity
   * reported by the input layer. Alarm and exposure state are kept.
   */
  resetChannel(channel: number): void {
    const sensor = this.sensorsByChannel.get(channel);
    if (sensor) {
      // Rebuilt on the next block, at that block's sample rate (which may have changed).
      sensor.forget();
      this.dropPendingFrames(sensor);
      return;
    }
    this.tach = null;
    this.tachAverage.reset();
  }

  /** Event time of the latest decision (null before the first). */
  get decisionTimeS(): number | null {
    return this.lastDecisionS;
  }

  /** Where the current outage ends: the earliest end of the channels' latest gaps. */
  private outageEndS(): number {
    let endS = Number.POSITIVE_INFINITY;
    for (const w of this.watermarks) if (w.gap) endS = Math.min(endS, w.gap[1]);
    return endS;
  }

  /** True when no bound channel had data at `tS`: nothing can be decided, and clocks pause. */
  private inOutage(tS: number): boolean {
    for (const w of this.watermarks) {
      if (!w.gap || tS <= w.gap[0] || tS > w.gap[1]) return false;
    }
    return true;
  }

  private advance(): EngineRecord[] {
    const out: EngineRecord[] = [];
    if (this.nextDecisionS === null) return out;
    const stepS = this.asset.analysis.decisionStepS;
    const limitS = this.decisionWatermarkS();
    while (this.nextDecisionS <= limitS + TIME_EPS_S) {
      let tS: number = this.nextDecisionS;
      this.evaluateFramesUpTo(tS);
      if (this.inOutage(tS)) {
        // Jump over the whole outage at once (it may be hours, or a clock error of years):
        // the clocks pause for all of it, and decisions resume on the grid after it.
        const startS = this.startS as number;
        const endS = Math.min(this.outageEndS(), limitS);
        const lastStep = Math.max(Math.floor((endS - startS + TIME_EPS_S) / stepS), Math.round((tS - startS) / stepS));
        const lastInS = startS + lastStep * stepS;
        const skippedS = lastInS - tS + stepS;
        for (const pair of this.pairs) pair.alarm.pause(skippedS);
        this.outageS += skippedS;
        tS = lastInS;
        if (this.nextStatusS !== null && tS >= this.nextStatusS - TIME_EPS_S) {
          const every = this.options.statusEveryS as number;
          this.nextStatusS += Math.ceil((tS - this.nextStatusS + TIME_EPS_S) / every) * every;
        }
      } else {
        this.decide(tS, stepS, out);
        if (this.nextStatusS !== null && tS >= this.nextStatusS - TIME_EPS_S) {
          out.push(this.status(tS));
          this.nextStatusS += this.options.statusEveryS as number;
        }
      }
      this.lastDecisionS = tS;
      // Multiply rather than accumulate so decision times do not drift over long runs.
      this.nextDecisionS = (this.startS as number) + (Math.round((tS - (this.startS as number)) / stepS) + 1) * stepS;
    }
    return out;
  }

  private decide(tS: number, stepS: number, out: EngineRecord[]): void {
    const speed = this.speedAt(tS);
    if (speed.rpm === null) this.speedStats.unknownS += stepS;
    else {
      this.speedStats.knownS += stepS;
      this.speedStats.minRpm = Math.min(this.speedStats.minRpm, speed.rpm);
      this.speedStats.maxRpm = Math.max(this.speedStats.maxRpm, speed.rpm);
    }
    const insideHz = new Map<string, number[]>();
    for (const pair of this.pairs) {
      const orderHz = speed.rpm === null ? null : (pair.order.multiple * speed.rpm) / 60;
      const position = bandPosition(orderHz, pair.component.bandHz, pair.deadbandHz);
      pair.lastPosition = position;
      if (position === 'inside') {
        pair.cyclesInDwell += (orderHz as number) * stepS;
        const list = insideHz.get(pair.component.id);
        if (list) list.push(orderHz as number);
        else insideHz.set(pair.component.id, [orderHz as number]);
      }
      const evidence = this.evidence(pair);
      const events = pair.alarm.step(tS, position, evidence?.velocity_rms_mm_s ?? null);
      for (const e of events) out.push(this.alarmRecord(pair, e, speed.rpm, orderHz, evidence));
      if (pair.alarm.state === 'normal' && position !== 'inside') pair.cyclesInDwell = 0;
    }
    for (const [id, exposure] of this.exposures) exposure.add(stepS, insideHz.get(id) ?? []);
  }

  private evidence(pair: PairState): AmplitudeEvidence | null {
    let best: SensorAnalysis | null = null;
    for (const id of pair.component.sensorIds) {
      const s = this.sensorsById.get(id);
      if (!s) continue;
      const a = s.orderAmplitude[pair.orderIndex];
      if (Number.isFinite(a) && (!best || a > best.orderAmplitude[pair.orderIndex])) best = s;
    }
    if (!best) return null;
    const amplitude = best.orderAmplitude[pair.orderIndex];
    const ref = pair.outside;
    return {
      velocity_rms_mm_s: amplitude,
      sensor: best.config.id,
      line_hz: best.orderLineHz[pair.orderIndex],
      outside_band: ref,
      ratio_to_outside: ref && ref.velocity_rms_mm_s > 0 ? amplitude / ref.velocity_rms_mm_s : null,
    };
  }

  private alarmRecord(
    pair: PairState,
    e: DwellEvent,
    speedRpm: number | null,
    orderHz: number | null,
    evidence: AmplitudeEvidence | null,
  ): AlarmRecord {
    this.counts[e.event]++;
    const c = pair.component;
    return {
      kind: 'alarm',
      event: e.event,
      asset: this.asset.id,
      component: c.id,
      order: pair.order.id,
      t_s: roundTimeS(e.tS),
      speed_rpm: speedRpm,
      order_hz: orderHz,
      fn_hz: c.fnHz,
      q: c.q,
      band_hz: [c.bandHz[0], c.bandHz[1]],
      speed_band_rpm: pair.speedBandRpm,
      dwell_s: e.dwellS,
      cycles: pair.cyclesInDwell,
      priority: e.priority,
      escalation: e.escalation,
      reason: e.reason,
      amplitude: evidence,
      procedure: this.asset.procedure,
      advice: adviceFor(e.event, pair.order.id, c.id, pair.speedBandRpm, this.asset.procedure),
    };
  }

  /** A status record at event time `tS` (normally the latest decision time). */
  status(tS: number = this.lastDecisionS ?? this.startS ?? 0): StatusRecord {
    const speed = this.speedAt(tS);
    return {
      kind: 'status',
      asset: this.asset.id,
      t_s: roundTimeS(tS),
      speed_rpm: speed.rpm,
      speed_source: this.speedSeries ? 'series' : speed.source ?? this.asset.speed.source,
      speed_confidence: speed.confidence,
      speed_state: speed.reason,
      orders: this.orderPositions(speed.rpm),
      active: this.activeAlarms(tS),
      exposure: this.exposureEntries(),
      severity: this.sensors.flatMap((s) => (s.severity ? [s.severity] : [])),
    };
  }

  private orderPositions(speedRpm: number | null): OrderPosition[] {
    return this.asset.orders.map((order) => {
      const orderHz = speedRpm === null ? null : (order.multiple * speedRpm) / 60;
      let nearest: PairState | null = null;
      let nearestPct = Number.POSITIVE_INFINITY;
      for (const pair of this.pairs) {
        if (pair.order.id !== order.id || orderHz === null) continue;
        const pct = separationPct(orderHz, pair.component.bandHz, pair.component.fnHz);
        if (pct < nearestPct) {
          nearest = pair;
          nearestPct = pct;
        }
      }
      return {
        order: order.id,
        order_hz: orderHz,
        nearest_component: nearest?.component.id ?? null,
        position: nearest ? bandPosition(orderHz, nearest.component.bandHz, nearest.deadbandHz) : 'unknown',
        separation_pct: nearest ? nearestPct : null,
      };
    });
  }

  private activeAlarms(tS: number): ActiveAlarmEntry[] {
    return this.pairs
      .filter((p) => p.alarm.isActive)
      .map((p) => ({
        component: p.component.id,
        order: p.order.id,
        priority: p.alarm.priority,
        dwell_s: p.alarm.dwellS(tS) ?? 0,
        state: p.alarm.state as 'active' | 'clearing',
      }));
  }

  private exposureEntries(): ExposureEntry[] {
    return [...this.exposures].map(([component, e]) => ({
      component,
      seconds_in_band: e.secondsInBand,
      cycles: e.cycles,
    }));
  }

  /** The end-of-run summary: counts, exposure, speed coverage, analysis settings, warnings. */
  snapshot(): EngineSnapshot {
    let dataEndS = this.resumedFromS;
    for (const w of this.watermarks) if (Number.isFinite(w.endS)) dataEndS = Math.max(dataEndS ?? w.endS, w.endS);
    const st = this.speedStats;
    return {
      version: 1,
      asset: this.asset.id,
      dataEndS,
      startS: this.startS,
      nextDecisionS: this.nextDecisionS,
      nextStatusS: this.nextStatusS,
      lastDecisionS: this.lastDecisionS,
      counts: { ...this.counts },
      speedStats: {
        knownS: st.knownS,
        unknownS: st.unknownS,
        minRpm: Number.isFinite(st.minRpm) ? st.minRpm : null,
        maxRpm: Number.isFinite(st.maxRpm) ? st.maxRpm : null,
      },
      outageS: this.outageS,
      pairs: this.pairs.map((p) => ({
        key: pairKey(p),
        signature: pairSignature(p, this.asset),
        dwell: p.alarm.snapshot(),
        cyclesInDwell: p.cyclesInDwell,
        outside: p.outside,
      })),
      exposure: this.asset.components.map((c) => {
        const e = this.exposures.get(c.id) as Exposure;
        return { component: c.id, signature: componentSignature(c), secondsInBand: e.secondsInBand, cycles: e.cycles };
      }),
    };
  }

  /**
   * Take over the state of a snapshot made by an engine of the same asset (before a restart,
   * or under the previous map). Must be called before any data is pushed. Returns which pairs
   * and components carried their state over and which started afresh because their
   * configuration changed.
   */
  restore(snapshot: EngineSnapshot): { restored: string[]; fresh: string[] } {
    if (snapshot.version !== 1 || snapshot.asset !== this.asset.id) {
      throw new Error(`snapshot of asset ${snapshot.asset} (version ${snapshot.version}) cannot restore engine of ${this.asset.id}`);
    }
    if (this.startS !== null) throw new Error('restore() must come before the first data');
    const restored: string[] = [];
    const fresh: string[] = [];
    const pairs = new Map(snapshot.pairs.map((p) => [p.key, p]));
    for (const pair of this.pairs) {
      const key = pairKey(pair);
      const old = pairs.get(key);
      if (old && old.signature === pairSignature(pair, this.asset)) {
        pair.alarm = new DwellAlarm(this.asset.alarm, old.dwell);
        pair.cyclesInDwell = old.cyclesInDwell;
        pair.outside = old.outside;
        restored.push(key);
      } else fresh.push(key);
    }
    const exposures = new Map(snapshot.exposure.map((e) => [e.component, e]));
    for (const c of this.asset.components) {
      const old = exposures.get(c.id);
      if (old && old.signature === componentSignature(c)) {
        const e = this.exposures.get(c.id) as Exposure;
        e.secondsInBand = old.secondsInBand;
        e.cycles = old.cycles;
      }
    }
    this.startS = snapshot.startS;
    this.nextDecisionS = snapshot.nextDecisionS;
    this.lastDecisionS = snapshot.lastDecisionS;
    this.nextStatusS = this.options.statusEveryS
      ? snapshot.nextStatusS ?? (snapshot.lastDecisionS ?? 0) + this.options.statusEveryS
      : null;
    Object.assign(this.counts, snapshot.counts);
    this.speedStats.knownS = snapshot.speedStats.knownS;
    this.speedStats.unknownS = snapshot.speedStats.unknownS;
    this.speedStats.minRpm = snapshot.speedStats.minRpm ?? Infinity;
    this.speedStats.maxRpm = snapshot.speedStats.maxRpm ?? -Infinity;
    this.outageS = snapshot.outageS;
    this.resumedFromS = snapshot.dataEndS;
    return { restored, fresh };
  }

  summary(): SummaryRecord {
    const tS = this.lastDecisionS ?? this.startS ?? 0;
    const stats = this.speedStats;
    return {
      kind: 'summary',
      asset: this.asset.id,
      duration_s: this.startS === null ? 0 : tS - this.startS,
      events: { ...this.counts },
      still_active: this.activeAlarms(tS),
      exposure: this.exposureEntries(),
      speed: {
        known_s: stats.knownS,
        unknown_s: stats.unknownS,
        min_rpm: Number.isFinite(stats.minRpm) ? stats.minRpm : null,
        max_rpm: Number.isFinite(stats.maxRpm) ? stats.maxRpm : null,
        source: this.speedSeries ? 'series' : this.asset.speed.source,
      },
      severity_max: this.sensors.flatMap((s) => (s.severityMax ? [s.severityMax] : [])),
      analysis: {
        sample_rate_hz: this.analysisRateHz,
        decimation: this.sensors[0]?.decimation ?? 1,
        frame_s: this.frameS,
        bin_hz: this.binHz,
        spectra: this.spectraCount,
      },
      data: { outage_s: this.outageS, non_finite_spectra: this.nonFiniteSpectra },
      warnings: [...this.warnings],
    };
  }
}

function pairKey(p: PairState): string {
  return `${p.component.id}/${p.order.id}`;
}

/** What a pair's alarm state depends on: its band, its order's multiple and the alarm settings. */
function pairSignature(p: PairState, asset: AssetConfig): string {
  return JSON.stringify([p.component.fnHz, p.component.bandHz, p.order.multiple, asset.alarm]);
}

function componentSignature(c: ComponentConfig): string {
  return JSON.stringify([c.fnHz, c.bandHz]);
}
