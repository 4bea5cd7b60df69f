/**
 * `qband simulate`: synthesises a recording of one asset of a map running through a speed
 * profile, streamed to a WAV file (and optionally the speed as a CSV series).
 */
import { writeFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import cliProgress from 'cli-progress';
import { readTextFile } from '../acquisition/readTextFile.ts';
import { WavWriter } from '../acquisition/wavWriter.ts';
import type { AssetConfig } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import { checkProfileAgainstAsset, parseProfile, type Profile } from '../simulation/profile.ts';
import { rpmAt, speedSchedule } from '../simulation/speedSchedule.ts';
import { synthesisLayout, synthesize } from '../simulation/synthesize.ts';
import { printable } from '../text/printable.ts';
import { reportFailure } from './failure.ts';
import { EXIT_CODES_HELP, EXIT_INVALID, EXIT_OK, type CliIo, type Command } from './io.ts';
import { pickAsset, readMapForCommand, writeMapProblems } from './mapForCommand.ts';
import { readOptions, stringOption } from './options.ts';
import { recordingChannelProblem } from '../config/internalChannels.ts';
import { usageError } from './usage.ts';

const FORMATS = ['float32', 'pcm16'] as const;
type OutputFormat = (typeof FORMATS)[number];

/** Tach pulse level per output format: 16-bit PCM holds [-1, 1), so 5 V would clip. */
const TACH_HIGH: Record<OutputFormat, number> = { float32: 5, pcm16: 0.5 };
/** Step of the --speed-out series (s). */
const SPEED_OUT_STEP_S = 0.1;

export function simulateHelp(): string {
  return `qband simulate: synthesise a recording of one asset running through a speed profile.

Usage: qband simulate --map <map.yaml> --profile <profile.yaml> -o <out.wav>
                      [--asset <id>] [--format float32|pcm16] [--speed-out <speed.csv>]

The profile (YAML, described in docs/simulate.md) gives the sample rate, a start speed and
holds and ramps, the forcing amplitude of each order, white noise and a seed. Each order's
forcing passes through every component it can excite as a single-degree-of-freedom
resonance (gain 1 far below fn, Q at fn), so build-up, ringing and phase through a ramp
come from the dynamics. The same profile and seed give the same file.

Channels: every sensor at its channel (its units divided by its scale); with a tach speed
source, pulses_per_rev pulses per revolution at the tach channel, 0 to 5 V in float32 and
0 to 0.5 in pcm16 (which holds values in [-1, 1)). Unused channels are silent.

Options:
  --map <file>        asset map (see docs/asset-map.md)
  --profile <file>    speed profile
  -o, --output <file> WAV file to write
  --asset <id>        asset to simulate (default: the profile's asset, or the only one)
  --format <f>        float32 (default) or pcm16
  --speed-out <file>  also write the speed as CSV: time_s,rpm every ${SPEED_OUT_STEP_S} s
  -h, --help          show this help

${EXIT_CODES_HELP}

Example:
  qband simulate --map config/demo-map.yaml --profile config/demo-profile.yaml \\
    -o demo/north-basin-runup.wav --format pcm16 --speed-out demo/north-basin-runup-speed.csv

A simulated recording is a test signal, not a measurement of any machine.
`;
}

interface SimulateArgs {
  map: string;
  profile: string;
  output: string;
  asset?: string;
  format: OutputFormat;
  speedOut?: string;
}

/** The largest profile read: a profile is a few dozen lines. */
const MAX_PROFILE_BYTES = 2 ** 20;

function parseArgs(args: string[]): SimulateArgs | 'help' | string {
  const parsed = readOptions(
    args,
    {
      map: { kind: 'value' },
      profile: { kind: 'value' },
      output: { kind: 'value', short: 'o' },
      asset: { kind: 'value' },
      format: { kind: 'value' },
      'speed-out': { kind: 'value' },
      help: { kind: 'flag', short: 'h' },
    },
    false,
  );
  if (typeof parsed === 'string') return parsed;
  if (parsed.values.help) return 'help';
  const got = (name: string) => stringOption(parsed, name);
  for (const [flag, name] of [['--map', 'map'], ['--profile', 'profile'], ['-o', 'output']] as const) {
    if (got(name) === undefined) return `missing ${flag} <file>`;
  }
  const format = (got('format') ?? 'float32') as OutputFormat;
  if (!FORMATS.includes(format)) return `--format must be one of ${FORMATS.join(', ')}, got '${printable(format)}'`;
  return { map: got('map')!, profile: got('profile')!, output: got('output')!, asset: got('asset'), format, speedOut: got('speed-out') };
}

function usage(io: CliIo, why: string): number {
  return usageError(io, 'simulate', why, 'qband simulate --map <map.yaml> --profile <profile.yaml> -o <out.wav>');
}

export const runSimulate: Command = async (args, io) => {
  const parsed = parseArgs(args);
  if (parsed === 'help') {
    io.stdout.write(simulateHelp());
    return EXIT_OK;
  }
  if (typeof parsed === 'string') return usage(io, parsed);
  try {
    return await simulate(io, parsed);
  } catch (err) {
    return reportFailure(io, 'simulate', err);
  }
};

async function simulate(io: CliIo, parsed: SimulateArgs): Promise<number> {
  const mapResult = await readMapForCommand(io, 'simulate', parsed.map);
  if (typeof mapResult === 'number') return mapResult;
  const profileText = await readTextFile(resolve(io.cwd, parsed.profile), MAX_PROFILE_BYTES, 'profile', 'QB_E_PROFILE_INVALID');
  writeMapProblems(io, parsed.map, mapResult);
  const profileName = printable(parsed.profile, 200);
  const { profile, problems, positions } = parseProfile(profileText);
  for (const p of problems) io.stderr.write(`${profileName}: error ${p.code} ${p.message}\n`);
  if (!mapResult.map || !profile) return EXIT_INVALID;

  let asset: AssetConfig;
  try {
    asset = pickAsset(mapResult.map.assets, parsed.asset ?? profile.assetId, "name one with --asset or in the profile's 'asset'");
  } catch (err) {
    if (parsed.asset !== undefined || !(err instanceof QbandError)) throw err;
    io.stderr.write(`${profileName}: error QB_E_PROFILE_ASSET asset: ${err.message}\n`);
    return EXIT_INVALID;
  }
  const unbound = recordingChannelProblem(asset, 'qband simulate');
  if (unbound) {
    io.stderr.write(`${unbound} [QB_E_CHANNEL_MISSING]\n`);
    return EXIT_INVALID;
  }
  const fit = checkProfileAgainstAsset(profile, asset, positions);
  for (const p of fit) io.stderr.write(`${profileName}: error ${p.code} ${p.message}\n`);
  if (fit.length > 0) return EXIT_INVALID;

  const summary = await writeRecording(io, parsed, asset, profile);
  if (parsed.speedOut !== undefined) await writeSpeedSeries(resolve(io.cwd, parsed.speedOut), profile);
  io.stdout.write(`${summary}${parsed.speedOut !== undefined ? `; speed series in ${printable(parsed.speedOut, 200)}` : ''}\n`);
  return EXIT_OK;
}

async function writeRecording(io: CliIo, args: SimulateArgs, asset: AssetConfig, profile: Profile): Promise<string> {
  const layout = synthesisLayout(asset, profile);
  const writer = await WavWriter.create(resolve(io.cwd, args.output), {
    sampleRateHz: profile.sampleRateHz,
    channels: layout.channelNames.length,
    format: args.format,
  });
  const bar = io.stderr.isTTY
    ? new cliProgress.SingleBar(
        { stream: io.stderr as NodeJS.WritableStream, format: 'simulate [{bar}] {percentage}% {value}/{total} s', hideCursor: true },
        cliProgress.Presets.shades_classic,
      )
    : undefined;
  bar?.start(Math.round(layout.durationS), 0);
  try {
    for (const block of synthesize(asset, profile, { framesPerBlock: 8192, tachHighV: TACH_HIGH[args.format] })) {
      await writer.write(block.channels);
      bar?.update(Math.round(block.t0S + block.channels[0].length / profile.sampleRateHz));
    }
  } finally {
    bar?.stop();
    await writer.close();
  }
  const channels = layout.channelNames.map((name, i) => `${i} ${name}`).join(', ');
  const clipped = writer.clippedSamples > 0 ? `; ${writer.clippedSamples} samples clipped to the ${args.format} range` : '';
  return (
    `wrote ${printable(args.output, 200)}: ${asset.id}, ${layout.durationS.toFixed(1)} s at ${profile.sampleRateHz} Hz, ` +
    `${layout.channelNames.length} channels (${channels}), ${args.format}, ${(writer.fileBytes / 1e6).toFixed(2)} MB${clipped}`
  );
}

/** time_s,rpm every SPEED_OUT_STEP_S from 0 to the end of the run. */
async function writeSpeedSeries(path: string, profile: Profile): Promise<void> {
  const schedule = speedSchedule(profile);
  const steps = Math.floor(schedule.durationS / SPEED_OUT_STEP_S + 1e-9);
  const rows = ['time_s,rpm'];
  for (let i = 0; i <= steps; i++) {
    const tS = i * SPEED_OUT_STEP_S;
    rows.push(`${tS.toFixed(1)},${rpmAt(schedule, tS).toFixed(2)}`);
  }
  try {
    await writeFile(path, `${rows.join('\n')}\n`);
  } catch (cause) {
    throw new QbandError('QB_E_FILE_WRITE', `${printable(path, 200)}: cannot write (${(cause as NodeJS.ErrnoException).code ?? (cause as Error).message})`, { cause });
  }
}
