/**
 * `qband demo`: the live story in about a minute, with nothing to install or configure.
 * Parses the command line, finds the bundled map and run, and hands over to runDemo; Ctrl-C
 * ends the run early and still stops everything cleanly.
 */
import { existsSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import { fileURLToPath } from 'node:url';
import { randomBytes } from 'node:crypto';
import { brokerCredentials } from '../agent/credentials.ts';
import { DEFAULT_HTTP_HOST, parseHttpAddress } from '../page/httpAddress.ts';
import { pageToken } from '../page/pageToken.ts';
import { DEFAULT_SPEED, type MachineSource } from '../demo/machinePublisher.ts';
import { runDemo, type DemoResult } from '../demo/runDemo.ts';
import { QbandError } from '../errors.ts';
import { parseProfile } from '../simulation/profile.ts';
import { printable } from '../text/printable.ts';
import { reportFailure } from './failure.ts';
import { EXIT_CODES_HELP, EXIT_OK, type CliIo, type Command } from './io.ts';
import { numberOption, readOptions, stringOption } from './options.ts';
import { usageError } from './usage.ts';

export const DEMO_MAP = fileURLToPath(new URL('../../config/demo-map.yaml', import.meta.url));
export const DEMO_RECORDING = fileURLToPath(new URL('../../demo/north-basin-runup.wav', import.meta.url));
export const DEMO_PROFILE = fileURLToPath(new URL('../../config/demo-profile.yaml', import.meta.url));

/** Accepted pace, data seconds per wall second. */
const MIN_SPEED = 0.1;
const MAX_SPEED = 1000;

export const DEMO_HELP = `Usage: qband demo [options]

Shows the live agent at work on a simulated machine, in about a minute. It starts:
  - an MQTT broker inside this process, on a free port of 127.0.0.1 (unless --broker);
  - the qband agent on config/demo-map.yaml: cw-pump-2, a fictional vertical cooling-water
    pump at the fictional site north-basin;
  - a simulated sensor gateway publishing the pump's 181 s run-up recording
    (demo/north-basin-runup.wav: accelerometer and tach) as sample blocks, stamped so that
    the run ends about now;
  - a view of what the agent publishes: shaft speed, each order against its nearest
    resonance band, alarm events with their evidence and advice, exposure, and a summary.
Then it stops everything and exits. What to expect: 1X dwells in the motor-reed band long
enough for one alarm (raised about 56 s into the run, cleared about 106 s in); vane pass
sweeps through the discharge-pipe band twice, too briefly for an alarm, and only counts as
exposure.

Options:
  --speed <x>            pace in seconds of data per second (default ${DEFAULT_SPEED}: the run takes
                         about a minute); from ${MIN_SPEED} to ${MAX_SPEED}
  --realtime             the run's own pace (--speed 1): about three minutes
  --broker <url>         use this broker instead of the embedded one (mqtt://host:1883,
                         mqtts://host:8883); credentials as for \`qband run\`
                         (QBAND_MQTT_USERNAME, QBAND_MQTT_PASSWORD or QBAND_MQTT_PASSWORD_FILE)
  --mqtt-version <v>     with --broker: 5 (default) or 3.1.1. The embedded broker speaks 3.1.1.
  --http <host:port>     serve the operator page and /metrics there while the run lasts
                         (default 127.0.0.1 on a free port; the address is printed, with a
                         token made for the run unless QBAND_HTTP_TOKEN is set)
  --no-http              no operator page
  --json                 print every message the agent publishes as one JSON line
                         {"topic", "message"}, and a final {"kind":"demo-summary"} line
  -h, --help             this text

${EXIT_CODES_HELP}

On a terminal the status panel is redrawn in place and alarm events scroll above it; in a
pipe or a CI log there is one status line whenever something changes (and every 5 s of data)
plus every alarm event. The agent's own log goes to a file in the temporary folder (its path is
printed); its warnings also show in the view. Ctrl-C ends the run early and stops cleanly.

Examples:
  npm start                                   # the same as: npx qband demo
  npx qband demo --speed 10                   # the whole run in about 20 s
  npx qband demo --broker mqtt://127.0.0.1:1883 --mqtt-version 3.1.1
  npx qband demo --json | grep '"event"'

The machine, its site and its procedure are fictional; the run is simulated. qband advises
only: it never stops a machine. Any response follows the site's procedures, local codes and
licensed practice.
`;

export interface DemoCommandOverrides {
  /** Options the command line does not carry: tests pass their own log path or signal. */
  logPath?: string;
  signal?: AbortSignal;
  clientId?: string;
  onResult?: (result: DemoResult) => void;
}

export function demoCommand(overrides: DemoCommandOverrides = {}): Command {
  return async (args, io) => {
    const parsed = readOptions(
      args,
      {
        speed: { kind: 'value' },
        realtime: { kind: 'flag' },
        broker: { kind: 'value' },
        'mqtt-version': { kind: 'value' },
        json: { kind: 'flag' },
        http: { kind: 'value' },
        'no-http': { kind: 'flag' },
        help: { kind: 'flag', short: 'h' },
      },
      false,
    );
    if (typeof parsed === 'string') return usage(io, parsed);
    const values = {
      help: parsed.values.help === true,
      realtime: parsed.values.realtime === true,
      json: parsed.values.json === true,
      speed: stringOption(parsed, 'speed'),
      broker: stringOption(parsed, 'broker'),
      'mqtt-version': stringOption(parsed, 'mqtt-version'),
    };
    if (values.help) {
      io.stdout.write(DEMO_HELP);
      return EXIT_OK;
    }
    if (values.realtime && values.speed !== undefined) return usage(io, '--realtime and --speed exclude each other (--realtime is --speed 1)');
    const speedOrFault = numberOption(parsed, 'speed', { min: MIN_SPEED, max: MAX_SPEED, unit: 'seconds of data per second' }, values.realtime ? 1 : DEFAULT_SPEED);
    if (typeof speedOrFault === 'string') return usage(io, speedOrFault);
    const speed = speedOrFault;
    const version = values['mqtt-version'];
    if (version !== undefined && version !== '5' && version !== '3.1.1') return usage(io, `--mqtt-version must be 5 or 3.1.1, got '${printable(version)}'`);
    if (version !== undefined && !values.broker) return usage(io, '--mqtt-version goes with --broker (the embedded broker speaks 3.1.1)');
    const httpText = stringOption(parsed, 'http');
    if (httpText !== undefined && parsed.values['no-http'] === true) return usage(io, '--http and --no-http exclude each other');
    const address = parseHttpAddress(httpText ?? `${DEFAULT_HTTP_HOST}:0`);
    if (typeof address === 'string') return usage(io, address);

    const stdout = io.stdout as CliIo['stdout'] & { isTTY?: boolean; columns?: number };
    const abort = new AbortController();
    const outer = overrides.signal;
    outer?.addEventListener('abort', () => abort.abort(), { once: true });
    // The reader of our output has gone (`qband demo --json | head`): end the run early.
    io.outputClosed?.addEventListener('abort', () => abort.abort(), { once: true });
    const onSigint = () => abort.abort();
    process.once('SIGINT', onSigint);
    try {
      const result = await runDemo({
        mapPath: DEMO_MAP,
        source: await demoSource(),
        speed,
        brokerUrl: values.broker,
        protocolVersion: version === '3.1.1' ? 4 : 5,
        connectOptions: values.broker ? await brokerCredentials(process.env, {}, io.cwd) : undefined,
        out: io.stdout,
        view: values.json ? 'json' : stdout.isTTY ? 'terminal' : 'plain',
        columns: stdout.columns,
        logPath: overrides.logPath,
        signal: abort.signal,
        clientId: overrides.clientId,
        cwd: io.cwd,
        // The demo's page takes the site token from the environment like \`qband run\`, else one made for this run.
        http: parsed.values['no-http'] === true ? null : { address, token: (await pageToken(process.env, io.cwd)) ?? randomBytes(12).toString('hex') },
      });
      overrides.onResult?.(result);
      return EXIT_OK;
    } catch (err) {
      return reportFailure(io, 'demo', err);
    } finally {
      process.removeListener('SIGINT', onSigint);
    }
  };
}

export const runDemoCommand: Command = demoCommand();

/** The bundled recording, or (in a checkout without it) the same run synthesised afresh. */
async function demoSource(): Promise<MachineSource> {
  if (existsSync(DEMO_RECORDING)) return { kind: 'recording', path: DEMO_RECORDING };
  const { profile, problems } = parseProfile(await readFile(DEMO_PROFILE, 'utf8'));
  if (!profile) throw new QbandError('QB_E_PROFILE_INVALID', `${DEMO_PROFILE}: ${problems.map((p) => p.message).join('; ')}`);
  return { kind: 'profile', profile };
}

function usage(io: CliIo, message: string): number {
  return usageError(io, 'demo', message, 'qband demo [--realtime | --speed <x>] [--broker <url>] [--mqtt-version 5|3.1.1] [--http <host:port> | --no-http] [--json]');
}
