/**
 * `qband replay`: run the dwell engine over a recording as fast as the machine allows and write
 * its records as JSON lines. The engine is the same one the live agent runs; only the source of
 * samples differs.
 */
import { readFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import { parseArgs } from 'node:util';
import cliProgress from 'cli-progress';
import { openRecording, readRecordingInfo } from '../acquisition/recordingReader.ts';
import { parseSpeedCsv } from '../acquisition/speedCsv.ts';
import { recordingChannelProblem } from '../config/internalChannels.ts';
import { loadAssetMapFile } from '../config/parseAssetMap.ts';
import type { AssetConfig } from '../config/types.ts';
import { AssetEngine } from '../engine/assetEngine.ts';
import { createRealFft } from '../manipulation/realFft.ts';
import type { SpeedPoint } from '../manipulation/speedPoint.ts';
import { textLine } from './textRecords.ts';
import { EXIT_INVALID, EXIT_OK, type CliIo, type Command } from './io.ts';
import { usageError } from './usage.ts';

export const REPLAY_HELP = `Usage: qband replay --map <map.yaml> [options] <recording.wav|recording.csv>

Runs the resonance-dwell engine over a recording, on the recording's own time, and writes one
JSON record per line to stdout:
  {"kind":"alarm","event":"raise"|"escalate"|"clear", ...}  when an order dwells in a band
  {"kind":"status", ...}                                   every --status-every seconds
  {"kind":"summary", ...}                                  once, at the end
t_s is seconds from the start of the recording. Progress goes to stderr when it is a terminal.

Options:
  --map <file>          asset map (YAML); channels of the recording are bound there
  --asset <id>          which asset of the map the recording belongs to (needed when the
                        map has more than one)
  --speed <file.csv>    known speed series, columns time_s,rpm: replaces the map's speed
                        source for this run (time_s on the recording's clock)
  --status-every <s>    also write a status record every <s> seconds of recording time
  --format <json|text>  json (default): one record per line for programs; text: one
                        readable line per record for people
  --fft <pffft|fftjs>   FFT implementation (default pffft, WebAssembly; fftjs is pure JS)
  --block <frames>      frames read per block (default 8192); changes speed, not results
  -h, --help            this text

Recordings: WAV (PCM 16/24/32-bit or 32-bit float, any number of channels) or CSV with a
time_s column followed by one column per channel (channel 0 first).

Examples:
  qband replay --map config/demo-map.yaml --status-every 10 demo/north-basin-runup.wav
  qband replay --map config/demo-map.yaml --format text --status-every 10 demo/north-basin-runup.wav
  qband replay --map site.yaml --asset fan-3 --speed fan-3-speed.csv fan-3.wav | grep '"alarm"'

qband advises only: it never stops a machine. Any response follows the site's procedures,
local codes and licensed practice.
`;

export const runReplay: Command = async (args, io) => {
  let parsed;
  try {
    parsed = parseArgs({
      args,
      allowPositionals: true,
      options: {
        map: { type: 'string' },
        asset: { type: 'string' },
        speed: { type: 'string' },
        'status-every': { type: 'string' },
        fft: { type: 'string', default: 'pffft' },
        format: { type: 'string', default: 'json' },
        block: { type: 'string', default: '8192' },
        help: { type: 'boolean', short: 'h' },
      },
    });
  } catch (err) {
    return usage(io, (err as Error).message);
  }
  const { values, positionals } = parsed;
  if (values.help) {
    io.stdout.write(REPLAY_HELP);
    return EXIT_OK;
  }
  if (!values.map) return usage(io, 'missing --map <map.yaml>');
  if (positionals.length !== 1) return usage(io, `expected one recording, got ${positionals.length}`);
  const statusEveryS = values['status-every'] === undefined ? 0 : Number(values['status-every']);
  if (!(statusEveryS >= 0) || !Number.isFinite(statusEveryS)) {
    return usage(io, `--status-every must be a number of seconds >= 0, got '${values['status-every']}'`);
  }
  const blockFrames = Number(values.block);
  if (!Number.isInteger(blockFrames) || blockFrames < 1) {
    return usage(io, `--block must be a whole number of frames >= 1, got '${values.block}'`);
  }
  if (values.format !== 'json' && values.format !== 'text') {
    return usage(io, `--format must be json or text, got '${values.format}'`);
  }
  const write = values.format === 'text' ? (r: Parameters<typeof textLine>[0]) => `${textLine(r)}\n` : (r: unknown) => `${JSON.stringify(r)}\n`;
  if (values.fft !== 'pffft' && values.fft !== 'fftjs') {
    return usage(io, `--fft must be pffft or fftjs, got '${values.fft}'`);
  }

  const mapPath = resolve(io.cwd, values.map);
  const loaded = await loadAssetMapFile(mapPath);
  for (const w of loaded.warnings) io.stderr.write(`warning: ${w.message}\n`);
  if (!loaded.map) {
    for (const p of loaded.problems) io.stderr.write(`${values.map}: ${p.message} [${p.code}]\n`);
    return EXIT_INVALID;
  }
  const asset = pickAsset(loaded.map.assets, values.asset, io);
  if (!asset) return EXIT_INVALID;
  const unbound = recordingChannelProblem(asset, 'qband replay');
  if (unbound) {
    io.stderr.write(`${unbound} [QB_E_CHANNEL_MISSING]\n`);
    return EXIT_INVALID;
  }

  let speedSeries: SpeedPoint[] | undefined;
  if (values.speed) {
    const path = resolve(io.cwd, values.speed);
    let text: string;
    try {
      text = await readFile(path, 'utf8');
    } catch (err) {
      io.stderr.write(`qband replay: cannot read speed file ${values.speed}: ${(err as Error).message} [QB_E_FILE_READ]\n`);
      return EXIT_INVALID;
    }
    const parsedSpeed = parseSpeedCsv(text, values.speed);
    if (parsedSpeed.problems.length > 0) {
      for (const p of parsedSpeed.problems) io.stderr.write(`${values.speed}:${p.line}: ${p.message} [QB_E_SPEED_CSV]\n`);
      return EXIT_INVALID;
    }
    speedSeries = parsedSpeed.points;
  }

  const recordingPath = resolve(io.cwd, positionals[0]);
  let info;
  try {
    info = await readRecordingInfo(recordingPath);
  } catch (err) {
    io.stderr.write(`qband replay: ${positionals[0]}: ${(err as Error).message}\n`);
    return EXIT_INVALID;
  }
  const engine = new AssetEngine(
    asset,
    { fft: await createRealFft(asset.analysis.frameSize, values.fft) },
    { statusEveryS, speedSeries },
  );
  const missing = engine.boundChannels.filter((c) => c >= info.channels);
  if (missing.length > 0) {
    io.stderr.write(
      `qband replay: the map binds channel(s) ${missing.join(', ')} of asset ${asset.id}, but ${positionals[0]} has ${info.channels} channel(s) (0 to ${info.channels - 1}) [QB_E_CHANNEL_MISSING]\n`,
    );
    return EXIT_INVALID;
  }

  const bar = io.stderr.isTTY
    ? new cliProgress.SingleBar(
        { stream: io.stderr as NodeJS.WritableStream, format: 'replay [{bar}] {percentage}% | {value}/{total} s of data | {alarms} alarm events', hideCursor: true },
        cliProgress.Presets.shades_classic,
      )
    : null;
  const totalS = Math.round(info.frames / info.sampleRateHz);
  bar?.start(totalS, 0, { alarms: 0 });
  let alarmEvents = 0;
  try {
    for await (const block of openRecording(recordingPath, blockFrames)) {
      const records = engine.pushBlock(block.t0S, block.info.sampleRateHz, block.channels);
      for (const r of records) {
        if (r.kind === 'alarm') alarmEvents++;
        io.stdout.write(write(r));
      }
      bar?.update(Math.round(block.t0S + block.channels[0].length / block.info.sampleRateHz), { alarms: alarmEvents });
    }
  } catch (err) {
    bar?.stop();
    io.stderr.write(`qband replay: ${positionals[0]}: ${(err as Error).message}\n`);
    return EXIT_INVALID;
  }
  bar?.stop();
  io.stdout.write(write(engine.summary()));
  return EXIT_OK;
};

function pickAsset(assets: AssetConfig[], id: string | undefined, io: CliIo): AssetConfig | null {
  const ids = assets.map((a) => a.id).join(', ');
  if (id === undefined) {
    if (assets.length === 1) return assets[0];
    io.stderr.write(`qband replay: the map has ${assets.length} assets (${ids}); name one with --asset [QB_E_USAGE]\n`);
    return null;
  }
  const asset = assets.find((a) => a.id === id);
  if (!asset) io.stderr.write(`qband replay: no asset '${id}' in the map; it has: ${ids} [QB_E_USAGE]\n`);
  return asset ?? null;
}

function usage(io: CliIo, message: string): number {
  return usageError(io, 'replay', message, 'qband replay --map <map.yaml> [options] <recording.wav|recording.csv>');
}
