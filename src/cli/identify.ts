/**
 * `qband identify`: measures fn and Q of the components from the run-ups, coast-downs and
 * trips in a recording. The engine (the same one replay and the live agent run) captures each
 * transient; identification fits the single-degree-of-freedom response to every band an order
 * swept through and compares it with the map.
 */
import { mkdir, readFile, writeFile } from 'node:fs/promises';
import { join, resolve } from 'node:path';
import { componentLines } from '../config/mapLines.ts';
import { QbandError } from '../errors.ts';
import { identifyComponents, type IdentifyOutcome } from '../identification/identifyComponents.ts';
import { identificationFigures } from '../render/identificationFigure.ts';
import { printable } from '../text/printable.ts';
import type { TransientRecord } from '../transients/transientRecord.ts';
import { reportFailure } from './failure.ts';
import { feedRecording, openRecordingRun, reportUnusable } from './recordingRun.ts';
import { EXIT_CODES_HELP, EXIT_OK, type CliIo, type Command } from './io.ts';
import { identifyText } from './identifyText.ts';
import { readOptions, stringOption, type OptionSpec } from './options.ts';
import { usageError } from './usage.ts';

export const IDENTIFY_HELP = `Usage: qband identify --map <map.yaml> [--asset id] [--json] [--svg <dir>] <recording>

Measures each component's natural frequency and Q from the machine's own run-ups, coast-downs
and trips in a recording, and compares them with the asset map. For every band an order swept
through, it fits the single-degree-of-freedom response to the order's captured amplitude
against speed (and its phase against the once-per-rev mark, with a tach), simulating the mode
along the sweep's own speed history so that a fast sweep does not bias the result. Free decays
(a component ringing on after an order has passed) give Q a second time, from the logarithmic
decrement. Where the measured band is further from the map's than the asset's tolerances
(transients.drift_fn_pct, transients.drift_q_pct), it says so, shows the map lines to change
and what the change does to each crossing. It never edits the map.

Options:
  --map <file>      asset map (YAML); channels and speed source as for replay
  --asset <id>      which asset of the map the recording belongs to
  --json            one JSON record per line: {"kind":"identified", ...} per band measured,
                    {"kind":"not-identified", ...} per band swept that gave no result (with
                    the reason), and a final {"kind":"identify-summary", ...}
  --svg <dir>       also write pictures there: amplitude (and phase, and a polar view with a
                    tach) against speed, with the fitted curve, the map's and the measured band
  --speed <file>    known speed series (time_s,rpm), as for replay
  -h, --help        this text

Without a tach the fit uses amplitude only; phase needs a once-per-rev tach. A band is
reported only when the sweep covered it with room either side, the fit explains the curve
(R^2 >= 0.9), a resonance explains it far better than a smooth curve, and fn and Q are known
to +-2 % and +-50 % (2 sigma). Bounds are +-2 standard deviations.

${EXIT_CODES_HELP}

Example:
  qband identify --map config/demo-map.yaml --svg out/ demo/north-basin-runup.wav

Identification advises: an engineer confirms a measured band (another run-up, an impact test)
before editing a map, and a band measured on one mode shape at one sensor is not a safety
case. qband never stops a machine; any response follows site procedures, local codes and
licensed practice.
`;

const OPTIONS: Record<string, OptionSpec> = {
  map: { kind: 'value' },
  asset: { kind: 'value' },
  json: { kind: 'flag' },
  svg: { kind: 'value' },
  speed: { kind: 'value' },
  help: { kind: 'flag', short: 'h' },
};

export const runIdentify: Command = async (args, io) => {
  const parsed = readOptions(args, OPTIONS, true);
  if (typeof parsed === 'string') return usage(io, parsed);
  if (parsed.values.help) {
    io.stdout.write(IDENTIFY_HELP);
    return EXIT_OK;
  }
  const map = stringOption(parsed, 'map');
  if (map === undefined) return usage(io, 'missing --map <map.yaml>');
  if (parsed.positionals.length !== 1) return usage(io, `expected one recording, got ${parsed.positionals.length}`);
  try {
    return await identify(io, {
      map,
      recording: parsed.positionals[0],
      asset: stringOption(parsed, 'asset'),
      json: parsed.values.json === true,
      svgDir: stringOption(parsed, 'svg'),
      speed: stringOption(parsed, 'speed'),
    });
  } catch (err) {
    return reportFailure(io, 'identify', err);
  }
};

interface IdentifyArgs {
  map: string;
  recording: string;
  asset?: string;
  json: boolean;
  svgDir?: string;
  speed?: string;
}

async function identify(io: CliIo, args: IdentifyArgs): Promise<number> {
  const run = await openRecordingRun(io, 'identify', args);
  if (typeof run === 'number') return run;
  const { asset } = run;
  const mapText = await readFile(resolve(io.cwd, args.map), 'utf8');
  const transients: TransientRecord[] = [];
  const complete = await feedRecording(io, run, 8192, (r) => {
    if (r.kind === 'transient') transients.push(r);
  });
  if (!complete) return EXIT_OK;
  reportUnusable(io, 'identify', run);
  if (io.stderr.isTTY === true) io.stderr.write(`qband identify: ${transients.length} transient(s) captured; fitting...\n`);
  const outcome = identifyComponents(asset, transients, { linesOf: (id) => componentLines(mapText, asset.id, id) });
  if (args.svgDir !== undefined) await writeFigures(io, args.svgDir, outcome);
  if (io.outputClosed?.aborted) return EXIT_OK;
  if (args.json) {
    for (const d of outcome.identified) io.stdout.write(`${JSON.stringify(d.record)}\n`);
    for (const r of outcome.rejected) io.stdout.write(`${JSON.stringify({ kind: 'not-identified', asset: asset.id, ...r })}\n`);
    io.stdout.write(
      `${JSON.stringify({
        kind: 'identify-summary',
        asset: asset.id,
        recording: args.recording,
        transients: transients.map((t) => ({ direction: t.direction, t_start_s: t.t_start_s, t_end_s: t.t_end_s, speed_from_rpm: t.speed_from_rpm, speed_to_rpm: t.speed_to_rpm, ended_by: t.ended_by })),
        identified: outcome.identified.length,
        drifted: outcome.identified.filter((d) => d.record.drift).length,
      })}\n`,
    );
  } else io.stdout.write(identifyText(asset.id, run.shown, transients, outcome));
  return EXIT_OK;
}

async function writeFigures(io: CliIo, dirArg: string, outcome: IdentifyOutcome): Promise<void> {
  const dir = resolve(io.cwd, dirArg);
  try {
    await mkdir(dir, { recursive: true });
    for (const d of outcome.identified) {
      for (const f of identificationFigures(d)) await writeFile(join(dir, f.name), f.svg);
    }
  } catch (err) {
    throw new QbandError('QB_E_FILE_WRITE', `cannot write pictures to ${printable(dirArg, 200)}: ${(err as Error).message}`);
  }
}

function usage(io: CliIo, message: string): number {
  return usageError(io, 'identify', message, 'qband identify --map <map.yaml> [--asset id] [--json] [--svg <dir>] <recording>');
}
