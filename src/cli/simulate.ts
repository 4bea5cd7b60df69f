/**
 * `qband simulate`: synthesises a recording of one asset of a map running through a speed
 * profile, streamed to a WAV file (and optionally the speed as a CSV series).
 */
import { readFile, writeFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import cliProgress from 'cli-progress';
import { WavWriter } from '../acquisition/wav.ts';
import { loadAssetMapFile, type AssetMapResult } from '../config/parseAssetMap.ts';
import type { AssetConfig } from '../config/types.ts';
import { QbandError } from '../errors.ts';
import { checkProfileAgainstAsset, parseProfile, type Profile } from '../simulation/profile.ts';
import { rpmAt, speedSchedule } from '../simulation/speedSchedule.ts';
import { synthesisLayout, synthesize } from '../simulation/synthesize.ts';
import { recordingChannelProblem } from '../config/internalChannels.ts';
import { EXIT_INVALID, EXIT_OK, EXIT_USAGE, type CliIo, type Command } from './io.ts';
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

Exit codes: 0 written, 1 map or profile not valid, 2 command line wrong or a file unreadable
or unwritable.

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

const VALUE_OPTIONS: Record<string, keyof SimulateArgs> = {
  '--map': 'map',
  '--profile': 'profile',
  '-o': 'output',
  '--output': 'output',
  '--asset': 'asset',
  '--format': 'format',
  '--speed-out': 'speedOut',
};

function parseArgs(args: string[]): SimulateArgs | 'help' | string {
  const got: Partial<Record<keyof SimulateArgs, string>> = {};
  for (let i = 0; i < args.length; i++) {
    const arg = args[i];
    if (arg === '--help' || arg === '-h') return 'help';
    const eq = arg.startsWith('--') ? arg.indexOf('=') : -1;
    const name = eq > 0 ? arg.slice(0, eq) : arg;
    const key = VALUE_OPTIONS[name];
    if (!key) return arg.startsWith('-') ? `unknown option '${arg}'` : `unexpected argument '${arg}'`;
    const value = eq > 0 ? arg.slice(eq + 1) : args[++i];
    if (value === undefined || value === '') return `${name} needs a value`;
    if (got[key] !== undefined) return `${name} given twice`;
    got[key] = value;
  }
  for (const [name, key] of [['--map', 'map'], ['--profile', 'profile'], ['-o', 'output']] as const) {
    if (got[key] === undefined) return `missing ${name} <file>`;
  }
  const format = (got.format ?? 'float32') as OutputFormat;
  if (!FORMATS.includes(format)) return `--format must be one of ${FORMATS.join(', ')}, got '${got.format}'`;
  return { map: got.map!, profile: got.profile!, output: got.output!, asset: got.asset, format, speedOut: got.speedOut };
}

function usage(io: CliIo, why: string): number {
  return usageError(io, 'simulate', why, 'qband simulate --map <map.yaml> --profile <profile.yaml> -o <out.wav>');
}

function fail(io: CliIo, err: unknown): number {
  if (err instanceof QbandError) {
    io.stderr.write(`qband simulate: ${err.message} [${err.code}]\n`);
    return EXIT_USAGE;
  }
  throw err;
}

function pickAsset(result: AssetMapResult, wanted: string | undefined): AssetConfig | string {
  const assets = result.map!.assets;
  const ids = assets.map((a) => a.id).join(', ');
  if (wanted === undefined) {
    if (assets.length === 1) return assets[0];
    return `the map has ${assets.length} assets (${ids}): name one with --asset or in the profile's 'asset'`;
  }
  return assets.find((a) => a.id === wanted) ?? `no asset '${wanted}' in the map (assets: ${ids})`;
}

export const runSimulate: Command = async (args, io) => {
  const parsed = parseArgs(args);
  if (parsed === 'help') {
    io.stdout.write(simulateHelp());
    return EXIT_OK;
  }
  if (typeof parsed === 'string') return usage(io, parsed);

  let mapResult: AssetMapResult;
  let profileText: string;
  try {
    mapResult = await loadAssetMapFile(resolve(io.cwd, parsed.map));
    profileText = await readFile(resolve(io.cwd, parsed.profile), 'utf8').catch((cause: NodeJS.ErrnoException) => {
      throw new QbandError('QB_E_FILE_READ', `cannot read profile '${parsed.profile}' (${cause.code ?? String(cause)})`, { cause });
    });
  } catch (err) {
    return fail(io, err);
  }
  for (const p of mapResult.problems) io.stderr.write(`${parsed.map}: error ${p.code} ${p.message}\n`);
  for (const w of mapResult.warnings) io.stderr.write(`${parsed.map}: warning ${w.code} ${w.message}\n`);
  const { profile, problems, positions } = parseProfile(profileText);
  for (const p of problems) io.stderr.write(`${parsed.profile}: error ${p.code} ${p.message}\n`);
  if (!mapResult.map || !profile) return EXIT_INVALID;

  const asset = pickAsset(mapResult, parsed.asset ?? profile.assetId);
  if (typeof asset === 'string') {
    if (parsed.asset !== undefined) return usage(io, asset);
    io.stderr.write(`${parsed.profile}: error QB_E_PROFILE_ASSET asset: ${asset}\n`);
    return EXIT_INVALID;
  }
  const unbound = recordingChannelProblem(asset, 'qband simulate');
  if (unbound) {
    io.stderr.write(`${unbound} [QB_E_CHANNEL_MISSING]\n`);
    return EXIT_INVALID;
  }
  const fit = checkProfileAgainstAsset(profile, asset, positions);
  for (const p of fit) io.stderr.write(`${parsed.profile}: error ${p.code} ${p.message}\n`);
  if (fit.length > 0) return EXIT_INVALID;

  try {
    const summary = await writeRecording(io, parsed, asset, profile);
    if (parsed.speedOut !== undefined) await writeSpeedSeries(resolve(io.cwd, parsed.speedOut), profile);
    io.stdout.write(`${summary}${parsed.speedOut !== undefined ? `; speed series in ${parsed.speedOut}` : ''}\n`);
  } catch (err) {
    return fail(io, err);
  }
  return EXIT_OK;
};

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
    `wrote ${args.output}: ${asset.id}, ${layout.durationS.toFixed(1)} s at ${profile.sampleRateHz} Hz, ` +
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
    throw new QbandError('QB_E_FILE_WRITE', `${path}: cannot write (${(cause as Error).message})`, { cause });
  }
}
