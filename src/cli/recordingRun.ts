/**
 * What every command that runs the engine over a recording does the same way (replay,
 * identify): read the map and name the asset, refuse sensors with no recording channel, read a
 * known speed series, open the recording and check it holds the bound channels, warn where its
 * rate cannot carry the map's frequencies, feed the engine only usable samples, and say how
 * many were left out.
 */
import { resolve } from 'node:path';
import { readTextFile } from '../acquisition/readTextFile.ts';
import { openRecording, readRecordingInfo } from '../acquisition/recordingReader.ts';
import { MAX_SAMPLE_ABS } from '../acquisition/recordingLimits.ts';
import { MAX_SPEED_CSV_BYTES, parseSpeedCsv } from '../acquisition/speedCsv.ts';
import type { RecordingBlock, RecordingInfo } from '../acquisition/wavFormat.ts';
import type { EngineRecord } from '../advisory/records.ts';
import { recordingChannelProblem } from '../config/internalChannels.ts';
import type { AssetConfig } from '../config/types.ts';
import { AssetEngine, type EngineOptions } from '../engine/assetEngine.ts';
import { rateCoverageWarnings } from '../engine/rateCoverage.ts';
import { QbandError } from '../errors.ts';
import { createRealFft } from '../manipulation/realFft.ts';
import type { SpeedPoint } from '../manipulation/speedPoint.ts';
import { printable } from '../text/printable.ts';
import { EngineFeeder } from './engineFeeder.ts';
import { EXIT_INVALID, type CliIo } from './io.ts';
import { pickAsset, readMapForCommand, writeMapProblems } from './mapForCommand.ts';

export interface RecordingRunArgs {
  map: string;
  recording: string;
  asset?: string;
  speed?: string;
  fft?: 'pffft' | 'fftjs';
  statusEveryS?: number;
}

export interface RecordingRun {
  asset: AssetConfig;
  engine: AssetEngine;
  info: RecordingInfo;
  recordingPath: string;
  /** The recording's name as given, made safe to print. */
  shown: string;
  feeder: EngineFeeder;
}

/** The engine ready to run over the recording, or the exit code once the problem was written. */
export async function openRecordingRun(io: CliIo, command: string, args: RecordingRunArgs): Promise<RecordingRun | number> {
  const loaded = await readMapForCommand(io, command, args.map);
  if (typeof loaded === 'number') return loaded;
  writeMapProblems(io, args.map, loaded);
  if (!loaded.map) return EXIT_INVALID;
  const asset = pickAsset(loaded.map.assets, args.asset);
  const unbound = recordingChannelProblem(asset, `qband ${command}`);
  if (unbound) {
    io.stderr.write(`${unbound} [QB_E_CHANNEL_MISSING]\n`);
    return EXIT_INVALID;
  }
  let speedSeries: SpeedPoint[] | undefined;
  if (args.speed !== undefined) {
    speedSeries = await readSpeedSeries(io, args.speed);
    if (!speedSeries) return EXIT_INVALID;
  }
  const recordingPath = resolve(io.cwd, args.recording);
  const shown = printable(args.recording, 200);
  const info = await readRecordingInfo(recordingPath);
  if (info.frames === 0) throw new QbandError('QB_E_RECORDING_EMPTY', `${shown} holds no samples (0 frames): nothing to ${command}`);
  const options: EngineOptions = { statusEveryS: args.statusEveryS, speedSeries };
  const engine = new AssetEngine(asset, { fft: await createRealFft(asset.analysis.frameSize, args.fft ?? 'pffft') }, options);
  const missing = engine.boundChannels.filter((c) => c >= info.channels);
  if (missing.length > 0) {
    throw new QbandError(
      'QB_E_CHANNEL_MISSING',
      `the map binds channel(s) ${missing.join(', ')} of asset ${asset.id}, but ${shown} has ${info.channels} channel(s) (0 to ${info.channels - 1})`,
    );
  }
  for (const w of rateCoverageWarnings(asset, info.sampleRateHz)) io.stderr.write(`qband ${command}: warning: ${shown}: ${w} [QB_E_RECORDING_RATE]\n`);
  return { asset, engine, info, recordingPath, shown, feeder: new EngineFeeder(engine) };
}

/**
 * Feeds the whole recording to the engine, handing each record (and each block, for progress)
 * on; stops early when the reader of stdout has gone. Returns false when it stopped early.
 */
export async function feedRecording(
  io: CliIo,
  run: RecordingRun,
  blockFrames: number,
  onRecord: (r: EngineRecord) => void,
  onBlock?: (block: RecordingBlock) => void,
): Promise<boolean> {
  // The engine keeps no reference to a block's arrays, and onBlock reads only its time and
  // length: the reader may overwrite the same arrays block after block.
  for await (const block of openRecording(run.recordingPath, blockFrames, run.engine.boundChannels, true)) {
    if (io.outputClosed?.aborted) return false;
    for (const r of run.feeder.push(block)) onRecord(r);
    onBlock?.(block);
  }
  if (io.outputClosed?.aborted) return false;
  for (const r of run.engine.finish()) onRecord(r);
  return true;
}

/** One warning per channel whose unusable samples were left out. */
export function reportUnusable(io: CliIo, command: string, run: RecordingRun): void {
  for (const [channel, n] of run.feeder.unusable) {
    io.stderr.write(
      `qband ${command}: warning: ${run.shown}: ${n} sample${n === 1 ? '' : 's'} of channel ${channel} not finite or beyond +-${MAX_SAMPLE_ABS}, treated as missing data [QB_E_SAMPLE_RANGE]\n`,
    );
  }
}

/** The speed series, or undefined after its problems were written. */
export async function readSpeedSeries(io: CliIo, arg: string): Promise<SpeedPoint[] | undefined> {
  const text = await readTextFile(resolve(io.cwd, arg), MAX_SPEED_CSV_BYTES, 'speed series', 'QB_E_SPEED_CSV');
  const parsed = parseSpeedCsv(text, arg);
  if (parsed.problems.length === 0) return parsed.points;
  const name = printable(arg, 200);
  for (const p of parsed.problems) io.stderr.write(`${name}:${p.line}: ${p.message} [QB_E_SPEED_CSV]\n`);
  if (parsed.moreProblems > 0) io.stderr.write(`${name}: and ${parsed.moreProblems} more problems not listed [QB_E_SPEED_CSV]\n`);
  return undefined;
}
