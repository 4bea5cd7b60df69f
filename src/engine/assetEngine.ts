/**
 * The resonance-dwell engine of one asset: samples and speeds in, alarm and status records out.
 *
 * Pure and on event time: it takes typed arrays with the timestamps of their first samples and
 * returns records; it has no clock, broker, file or logger. Replay and the live agent drive the
 * very same engine, so the same data gives the same alarms however fast it arrives.
 *
 * Data path (ISO 13374 stages, in the order the folders of src/ read):
 *   sensor channels -> SensorAnalysis (zoom by decimation, Hann, averaging)
 *                   -> velocity spectrum -> order amplitudes, broadband severity
 *   speed           -> SpeedSource (tach, tachless tracker on the speed sensor's samples,
 *                      topic or series -> SpeedTrack)
 *   every decision step (decision_step_s of data time), for each (component, order) pair:
 *       order frequency from the speed -> band position -> DwellAlarm -> alarm records
 *
 * The engine coordinates; its parts live beside it: `speedSource.ts` (where speed comes from,
 * and how long decisions wait for it), `pairState.ts`, `spectrumEvidence.ts` (spectra read in
 * time order), `engineRecords.ts` (alarm, status and summary records), `engineSnapshot.ts`
 * (restart and reload state).
 *
 * Two paths to find: the PUSH path (pushChannel / pushBlock / pushSpeed -> ingest ->
 * feedSensor) takes samples in and runs no decision; the DECISION loop (advance -> decide)
 * runs every decision step up to the watermark: the earliest time every bound channel has
 * reached, held back until speed evidence for that time can have arrived. No decision is ever
 * taken on a speed we do not know.
 */
import type { AmplitudeEvidence, EngineRecord, StatusRecord, SummaryRecord } from '../advisory/records.ts';
import type { AssetConfig } from '../config/types.ts';
import { bandPosition } from '../detection/bandPosition.ts';
import { Exposure } from '../detection/exposure.ts';
import type { RealFft } from '../manipulation/realFft.ts';
import type { SpeedPoint } from '../manipulation/speedPoint.ts';
import { alarmRecord, pairEvidence, statusRecord, summaryRecord, type RecordSources } from './engineRecords.ts';
import { applySnapshot, checkSnapshotFor, newProgress, takeSnapshot, type EngineSnapshot } from './engineSnapshot.ts';
import { buildPairs, type PairState } from './pairState.ts';
import { SensorAnalysis } from './sensorAnalysis.ts';
import { SpectrumEvidence } from './spectrumEvidence.ts';
import { SpeedSource } from './speedSource.ts';
import { TransientCapture } from '../transients/transientCapture.ts';

export type { EngineSnapshot } from './engineSnapshot.ts';

export interface EngineOptions {
  /** Emit a status record every this many seconds of data time (0 or absent: never). */
  statusEveryS?: number;
  /**
   * A known speed series (replay `--speed`): replaces the map's speed source for this run.
   * Points must be sorted by time.
   */
  speedSeries?: SpeedPoint[];
  /** Capture run-ups and coast-downs as transient records (default true). */
  captureTransients?: boolean;
}

export interface EngineDeps {
  /** One real FFT of the given size; the engine shares it between sensors (calls are sequential), and the tachless tracker makes its frames' transform on the same backend. */
  fft: RealFft;
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
  private readonly speed: SpeedSource;
  /** Run-up and coast-down capture (null when switched off). */
  private readonly transients: TransientCapture | null;
  private readonly watermarks: ChannelWatermark[];
  /** Decision clock and tallies (what a snapshot keeps of the engine's own). */
  private readonly progress = newProgress();
  private readonly spectra: SpectrumEvidence;
  private shedding = false;
  private shedBlockCount = 0;
  /** Set by restore(): where the previous run's data ended, so the first block shows the gap. */
  private resumedFromS: number | null = null;
  private readonly warnings = new Set<string>();
  private readonly warn = (m: string): void => void this.warnings.add(m);

  constructor(asset: AssetConfig, deps: EngineDeps, options: EngineOptions = {}) {
    if (deps.fft.size !== asset.analysis.frameSize) {
      throw new Error(`engine FFT size ${deps.fft.size} differs from the map's frame size ${asset.analysis.frameSize}`);
    }
    this.asset = asset;
    this.options = options;
    this.speed = new SpeedSource(asset, options.speedSeries, deps.fft);
    this.spectra = new SpectrumEvidence(asset);
    this.transients =
      options.captureTransients === false
        ? null
        : new TransientCapture(asset, asset.transients, { speedSeries: Boolean(options.speedSeries) });
    // Shared by every sensor, each using it within one call (SensorAnalysis).
    const shared = { velocity: new Float64Array(asset.analysis.frameSize / 2 + 1), outputPool: [] };
    this.sensors = asset.sensors.map((config) => new SensorAnalysis(config, asset, deps.fft, shared));
    for (const s of this.sensors) {
      this.sensorsByChannel.set(s.config.channel, s);
      this.sensorsById.set(s.config.id, s);
    }
    this.pairs = buildPairs(asset);
    this.exposures = new Map(asset.components.map((c) => [c.id, new Exposure()]));
    const channels = asset.sensors.map((s) => s.channel);
    const tach = this.speed.tachChannel;
    if (tach !== null) channels.push(tach);
    this.watermarks = channels.map((channel) => ({ channel, endS: Number.NEGATIVE_INFINITY, gap: null }));
  }

  /** Channel numbers the engine needs data from (sensors, and the tach when it is the speed source). */
  get boundChannels(): number[] {
    return this.watermarks.map((w) => w.channel);
  }

  // ---- push path: samples and speeds in --------------------------------------------------

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
    this.speed.addPoint(point);
    return this.advance();
  }

  private ingest(channel: number, t0S: number, sampleRateHz: number, samples: Float32Array): void {
    const p = this.progress;
    if (p.startS === null) {
      p.startS = t0S;
      p.nextDecisionS = t0S + this.asset.analysis.decisionStepS;
      if (this.options.statusEveryS) p.nextStatusS = t0S + this.options.statusEveryS;
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
      this.transients?.pushSamples(channel, t0S, sampleRateHz, samples);
      this.feedSensor(sensor, t0S, sampleRateHz, samples);
      return;
    }
    for (const rev of this.speed.pushTach(t0S, sampleRateHz, samples)) this.transients?.pushRevolution(rev.tS, rev.rpm);
  }

  private feedSensor(sensor: SensorAnalysis, t0S: number, sampleRateHz: number, samples: Float32Array): void {
    // The speed path first: it has its own frames, and is never shed.
    if (this.speed.isSpeedSensor(sensor.config.id)) this.speed.pushSpeedSensor(t0S, sampleRateHz, samples);
    if (this.shedding) {
      this.shedBlockCount++;
      return;
    }
    const { frames, builtAtHz } = sensor.push(t0S, sampleRateHz, samples);
    if (builtAtHz !== null) for (const m of this.spectra.built(builtAtHz)) this.warnings.add(m);
    for (const frame of frames) this.spectra.queue(sensor, frame);
  }

  /**
   * Overload rule, first stage: while set, sensors skip their spectra (the costly part); the
   * tachless speed path goes on. Speed, dwell decisions and exposure go on exactly; order
   * amplitudes and severity are not measured meanwhile (the evidence of alarms raised then is
   * null) and each spectrum restarts when shedding ends.
   */
  set shedSpectra(on: boolean) {
    if (on === this.shedding) return;
    this.shedding = on;
    if (!on) return;
    for (const sensor of this.sensors) {
      sensor.forget();
      this.spectra.drop(sensor);
    }
  }

  get shedSpectra(): boolean {
    return this.shedding;
  }

  /** Sample blocks whose spectra were skipped by the overload rule. */
  get shedBlocks(): number {
    return this.shedBlockCount;
  }

  /**
   * Forget a channel's signal history (spectrum, tach edges) after a gap or a discontinuity
   * reported by the input layer. Alarm and exposure state are kept.
   */
  resetChannel(channel: number): void {
    this.transients?.resetChannel(channel);
    const sensor = this.sensorsByChannel.get(channel);
    if (sensor) {
      // Rebuilt on the next block, at that block's sample rate (which may have changed).
      sensor.forget();
      this.spectra.drop(sensor);
      if (this.speed.isSpeedSensor(sensor.config.id)) this.speed.resetSpeedSensor();
      return;
    }
    this.speed.resetTach();
  }

  // ---- decision loop ------------------------------------------------------------------------

  /** How far decisions may go: all bound channels there, and speed evidence had time to arrive. */
  private decisionWatermarkS(): number {
    let sampleS = Number.POSITIVE_INFINITY;
    for (const w of this.watermarks) sampleS = Math.min(sampleS, w.endS);
    return this.speed.watermarkS(sampleS);
  }

  /** Event time of the latest decision (null before the first). */
  get decisionTimeS(): number | null {
    return this.progress.lastDecisionS;
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
    const p = this.progress;
    if (p.nextDecisionS === null) return out;
    const startS = p.startS as number;
    const stepS = this.asset.analysis.decisionStepS;
    const limitS = this.decisionWatermarkS();
    while (p.nextDecisionS <= limitS + TIME_EPS_S) {
      let tS: number = p.nextDecisionS;
      this.spectra.readUpTo(tS, TIME_EPS_S, (t) => this.speed.at(t), this.pairs, this.warn);
      if (this.inOutage(tS)) {
        // Jump over the whole outage at once (it may be hours, or a clock error of years):
        // the clocks pause for all of it, and decisions resume on the grid after it.
        const endS = Math.min(this.outageEndS(), limitS);
        const lastStep = Math.max(Math.floor((endS - startS + TIME_EPS_S) / stepS), Math.round((tS - startS) / stepS));
        const lastInS = startS + lastStep * stepS;
        const skippedS = lastInS - tS + stepS;
        for (const pair of this.pairs) pair.alarm.pause(skippedS);
        p.outageS += skippedS;
        tS = lastInS;
        if (p.nextStatusS !== null && tS >= p.nextStatusS - TIME_EPS_S) {
          const every = this.options.statusEveryS as number;
          p.nextStatusS += Math.ceil((tS - p.nextStatusS + TIME_EPS_S) / every) * every;
        }
      } else {
        this.decide(tS, stepS, out);
        if (p.nextStatusS !== null && tS >= p.nextStatusS - TIME_EPS_S) {
          out.push(this.status(tS));
          p.nextStatusS += this.options.statusEveryS as number;
        }
      }
      p.lastDecisionS = tS;
      // Multiply rather than accumulate so decision times do not drift over long runs.
      p.nextDecisionS = startS + (Math.round((tS - startS) / stepS) + 1) * stepS;
    }
    return out;
  }

  private decide(tS: number, stepS: number, out: EngineRecord[]): void {
    const speed = this.speed.at(tS);
    const stats = this.progress.speedStats;
    if (speed.rpm === null) stats.unknownS += stepS;
    else {
      stats.knownS += stepS;
      stats.minRpm = Math.min(stats.minRpm, speed.rpm);
      stats.maxRpm = Math.max(stats.maxRpm, speed.rpm);
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
      const evidence: AmplitudeEvidence | null = pairEvidence(pair, this.sensorsById);
      const events = pair.alarm.step(tS, position, evidence?.velocity_rms_mm_s ?? null);
      for (const e of events) {
        this.progress.counts[e.event]++;
        out.push(alarmRecord(this.asset, pair, e, speed.rpm, orderHz, evidence));
      }
      if (pair.alarm.state === 'normal' && position !== 'inside') pair.cyclesInDwell = 0;
    }
    for (const [id, exposure] of this.exposures) exposure.add(stepS, insideHz.get(id) ?? []);
    if (this.transients) {
      for (const r of this.transients.step(tS, speed.rpm, (t) => this.speed.at(t).rpm, this.speed.sourceName(speed) ?? '')) out.push(r);
    }
  }

  /**
   * The data has ended (a replay's last block): a run-up or coast-down still in progress is
   * reported with what there is. The live agent never calls it: its data does not end.
   */
  finish(): EngineRecord[] {
    return this.transients ? this.transients.finish() : [];
  }

  // ---- records and state --------------------------------------------------------------------

  private get recordSources(): RecordSources {
    return { asset: this.asset, pairs: this.pairs, exposures: this.exposures, sensors: this.sensors };
  }

  /** A status record at event time `tS` (normally the latest decision time). */
  status(tS: number = this.progress.lastDecisionS ?? this.progress.startS ?? 0): StatusRecord {
    const speed = this.speed.at(tS);
    return statusRecord(this.recordSources, tS, speed, this.speed.sourceName(speed));
  }

  /** The end-of-run summary: counts, exposure, speed coverage, analysis settings, warnings. */
  summary(): SummaryRecord {
    return summaryRecord(this.recordSources, this.progress, {
      speedSource: this.speed.configuredSourceName,
      analysis: {
        sample_rate_hz: this.spectra.analysisRateHz,
        decimation: this.sensors[0]?.decimation ?? 1,
        frame_s: this.spectra.frameS,
        bin_hz: this.spectra.binHz,
        spectra: this.spectra.spectraCount,
      },
      nonFiniteSpectra: this.spectra.nonFiniteSpectra,
      warnings: [...this.warnings],
    });
  }

  /** The state to carry over a restart or a map reload (see engineSnapshot.ts). */
  snapshot(): EngineSnapshot {
    let dataEndS = this.resumedFromS;
    for (const w of this.watermarks) if (Number.isFinite(w.endS)) dataEndS = Math.max(dataEndS ?? w.endS, w.endS);
    return takeSnapshot(this.asset, this.progress, dataEndS, this.pairs, this.exposures);
  }

  /**
   * Take over the state of a snapshot made by an engine of the same asset (before a restart,
   * or under the previous map). Must be called before any data is pushed. Returns which pairs
   * and components carried their state over and which started afresh because their
   * configuration changed.
   */
  restore(snapshot: EngineSnapshot): { restored: string[]; fresh: string[] } {
    checkSnapshotFor(snapshot, this.asset);
    if (this.progress.startS !== null) throw new Error('restore() must come before the first data');
    const result = applySnapshot(snapshot, this.asset, this.options.statusEveryS, this.progress, this.pairs, this.exposures);
    this.resumedFromS = snapshot.dataEndS;
    return result;
  }
}
