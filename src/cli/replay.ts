/**
 * `qband replay`: run the dwell engine over a recording as fast as the machine allows and write
 * its records as JSON lines. The engine is the same one the live agent runs; only the source of
 * samples differs.
 */
import cliProgress from 'cli-progress';
import { printable } from '../text/printable.ts';
import { reportFailure } from './failure.ts';
import { feedRecording, openRecordingRun, reportUnusable } from './recordingRun.ts';
import { EXIT_CODES_HELP, EXIT_OK, type CliIo, type Command } from './io.ts';
import { numberOption, readOptions, stringOption, type OptionSpec } from './options.ts';
import { textLine } from './textRecords.ts';
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

Recordings: WAV (PCM 16/24/32-bit or 32-bit float) or CSV with a time_s column followed by
one column per channel (channel 0 first); from 1 Hz to 1 MHz, at most 1024 channels. Only the
channels the map binds are decoded. Samples that are not finite or lie beyond +-1e6 are
missing data: left out, counted in a warning and in the summary's unusable_samples.

${EXIT_CODES_HELP}

Examples:
  qband replay --map config/demo-map.yaml --status-every 10 demo/north-basin-runup.wav
  qband replay --map config/demo-map.yaml --format text --status-every 10 demo/north-basin-runup.wav
  qband replay --map site.yaml --asset fan-3 --speed fan-3-speed.csv fan-3.wav | grep '"alarm"'

qband advises only: it never stops a machine. Any response follows the site's procedures,
local codes and licensed practice.
`;

const OPTIONS: Record<string, OptionSpec> = {
  map: { kind: 'value' },
  asset: { kind: 'value' },
  speed: { kind: 'value' },
  'status-every': { kind: 'value' },
  fft: { kind: 'value' },
  format: { kind: 'value' },
  block: { kind: 'value' },
  help: { kind: 'flag', short: 'h' },
};

interface ReplayArgs {
  map: string;
  recording: string;
  asset?: string;
  speed?: string;
  statusEveryS: number;
  blockFrames: number;
  format: 'json' | 'text';
  fft: 'pffft' | 'fftjs';
}

export const runReplay: Command = async (args, io) => {
  const parsed = readOptions(args, OPTIONS, true);
  if (typeof parsed === 'string') return usage(io, parsed);
  if (parsed.values.help) {
    io.stdout.write(REPLAY_HELP);
    return EXIT_OK;
  }
  const map = stringOption(parsed, 'map');
  if (map === undefined) return usage(io, 'missing --map <map.yaml>');
  if (parsed.positionals.length !== 1) return usage(io, `expected one recording, got ${parsed.positionals.length}`);
  const statusEveryS = numberOption(parsed, 'status-every', { min: 0, max: 86_400, unit: 'seconds' }, 0);
  if (typeof statusEveryS === 'string') return usage(io, statusEveryS);
  const blockFrames = numberOption(parsed, 'block', { min: 1, max: 1_048_576, integer: true, unit: 'frames' }, 8192);
  if (typeof blockFrames === 'string') return usage(io, blockFrames);
  const format = stringOption(parsed, 'format') ?? 'json';
  if (format !== 'json' && format !== 'text') return usage(io, `--format must be json or text, got '${printable(format)}'`);
  const fft = stringOption(parsed, 'fft') ?? 'pffft';
  if (fft !== 'pffft' && fft !== 'fftjs') return usage(io, `--fft must be pffft or fftjs, got '${printable(fft)}'`);
  const options: ReplayArgs = {
    map,
    recording: parsed.positionals[0],
    asset: stringOption(parsed, 'asset'),
    speed: stringOption(parsed, 'speed'),
    statusEveryS,
    blockFrames,
    format,
    fft,
  };
  try {
    return await replay(io, options);
  } catch (err) {
    return reportFailure(io, 'replay', err);
  }
};

async function replay(io: CliIo, args: ReplayArgs): Promise<number> {
  const write = args.format === 'text' ? (r: Parameters<typeof textLine>[0]) => `${textLine(r)}\n` : (r: unknown) => `${JSON.stringify(r)}\n`;
  const run = await openRecordingRun(io, 'replay', args);
  if (typeof run === 'number') return run;
  const bar = io.stderr.isTTY
    ? new cliProgress.SingleBar(
        { stream: io.stderr as NodeJS.WritableStream, format: 'replay [{bar}] {percentage}% | {value}/{total} s of data | {alarms} alarm events', hideCursor: true },
        cliProgress.Presets.shades_classic,
      )
    : null;
  bar?.start(Math.round(run.info.frames / run.info.sampleRateHz), 0, { alarms: 0 });
  let alarmEvents = 0;
  let complete: boolean;
  try {
    complete = await feedRecording(
      io,
      run,
      args.blockFrames,
      (r) => {
        if (r.kind === 'alarm') alarmEvents++;
        io.stdout.write(write(r));
      },
      (block) => bar?.update(Math.round(block.t0S + blockLength(block) / block.info.sampleRateHz), { alarms: alarmEvents }),
    );
  } finally {
    bar?.stop();
  }
  // The reader of our output has gone (`| head`): stop quietly.
  if (!complete) return EXIT_OK;
  reportUnusable(io, 'replay', run);
  const summary = { ...run.engine.summary(), unusable_samples: run.feeder.unusableTotal };
  io.stdout.write(write(summary));
  return EXIT_OK;
}

/** Frames in a block (the length of any decoded channel). */
function blockLength(block: { channels: Float32Array[] }): number {
  return Math.max(0, ...block.channels.map((c) => c.length));
}

function usage(io: CliIo, message: string): number {
  return usageError(io, 'replay', message, 'qband replay --map <map.yaml> [options] <recording.wav|recording.csv>');
}
