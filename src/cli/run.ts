/**
 * `qband run`: the live agent. Wires the real logger, clock and MQTT connector into the agent,
 * and stops it cleanly on SIGINT or SIGTERM.
 */
import { resolve } from 'node:path';
import { Agent } from '../agent/agent.ts';
import { brokerCredentials } from '../agent/credentials.ts';
import { createLogger } from '../agent/logger.ts';
import { parseWorkerSetting } from '../agent/workers/workerCount.ts';
import { parseHttpAddress } from '../page/httpAddress.ts';
import { startPageServer, type PageServer } from '../page/pageServer.ts';
import { pageToken } from '../page/pageToken.ts';
import { printable } from '../text/printable.ts';
import { reportFailure } from './failure.ts';
import { EXIT_CODES_HELP, EXIT_OK, type CliIo, type Command } from './io.ts';
import { readOptions, stringOption } from './options.ts';
import { usageError } from './usage.ts';

export const RUN_HELP = `Usage: qband run --map <map.yaml> [options]

Runs the live agent: subscribes to the sample blocks (and speed records) that the asset map's
sensors name, runs the resonance-dwell engine on the samples' own timestamps, and publishes
under the map's topic prefix (default qband):
  <prefix>/<asset>/alarm                 alarm events (raise, escalate, clear, acknowledge,
                                         shelve, unshelve), QoS 1
  <prefix>/<asset>/state                 retained: speed, orders against bands, active alarms,
                                         exposure, severity zone, data freshness
  <prefix>/agent/<client id>/status      retained presence (online / offline as last will)
Operators acknowledge or shelve on <prefix>/<asset>/command (docs/topics.md). A changed map
file is applied without losing dwell state; an invalid one is reported and the last good map
stays. Ctrl-C (SIGINT) or SIGTERM stops cleanly.

Options:
  --map <file>            asset map (YAML), with broker and topics (docs/asset-map.md)
  --broker <url>          mqtt://host:1883 or mqtts://host:8883; overrides broker.url
  --mqtt-version <v>      5 (default) or 3.1.1
  --client-id <id>        MQTT client id (default qband-<site>-<hostname>); keep it stable:
                          the broker keeps the agent's session (and what arrives while
                          it is away) under this id
  --ca <file>             CA certificate(s) to trust for mqtts:// (server name is checked)
  --cert <file>           client certificate for mqtts://, with --key
  --key <file>            client private key for mqtts://
  --state-dir <dir>       durable journal: alarm events until the broker has them, and
                          the dwell state and exposure that survive a restart (default
                          $QBAND_STATE_DIR, else ./qband-state)
  --no-state              keep nothing across restarts
  --no-watch              do not reload the map when the file changes
  --workers <n|auto>      worker threads for the assets' engines (default auto: one per
                          core, at most one per asset, none for a one-asset map or on a
                          single core); 0 runs every asset in the agent's own thread.
                          The same alarm records whatever the number (docs/deployment.md)
  --http <host:port>      serve the operator page and /metrics (Prometheus text) on this
                          address (default: off). A bare port or :port binds 127.0.0.1;
                          give 0.0.0.0:<port> only where the site means the page to be
                          reached from other machines (docs/operator-page.md).
                          Acknowledge and shelve from the page need the site token from
                          QBAND_HTTP_TOKEN or QBAND_HTTP_TOKEN_FILE (at least 16
                          characters); without one the page is read-only
  --pretty                readable logs for people instead of JSON lines
  --log-level <level>     trace, debug, info (default), warn, error
  -h, --help              this text

${EXIT_CODES_HELP} A map that cannot be read or is not valid, or
credentials that cannot be read, stop it before it starts (exit 1).

Credentials never go in the map: QBAND_MQTT_USERNAME with QBAND_MQTT_PASSWORD or
QBAND_MQTT_PASSWORD_FILE (a file holding the password) from the environment.

Example:
  QBAND_MQTT_USERNAME=qband-agent QBAND_MQTT_PASSWORD_FILE=/run/secrets/mqtt \\
    qband run --map /etc/qband/map.yaml --broker mqtt://127.0.0.1:1883

qband advises only: it never stops a machine and never publishes to a machine's controls.
Any response follows the site's procedures, local codes and licensed practice.
`;

const OPTIONS = {
  map: { kind: 'value' },
  broker: { kind: 'value' },
  'mqtt-version': { kind: 'value' },
  'client-id': { kind: 'value' },
  ca: { kind: 'value' },
  cert: { kind: 'value' },
  key: { kind: 'value' },
  'no-watch': { kind: 'flag' },
  workers: { kind: 'value' },
  'state-dir': { kind: 'value' },
  'no-state': { kind: 'flag' },
  pretty: { kind: 'flag' },
  'log-level': { kind: 'value' },
  http: { kind: 'value' },
  help: { kind: 'flag', short: 'h' },
} as const;

export const runRun: Command = async (args, io) => {
  const parsed = readOptions(args, OPTIONS, false);
  if (typeof parsed === 'string') return usage(io, parsed);
  if (parsed.values.help) {
    io.stdout.write(RUN_HELP);
    return EXIT_OK;
  }
  const opt = (name: keyof typeof OPTIONS) => stringOption(parsed, name);
  const map = opt('map');
  if (!map) return usage(io, 'missing --map <map.yaml>');
  const version = opt('mqtt-version') ?? '5';
  if (version !== '5' && version !== '3.1.1') return usage(io, `--mqtt-version must be 5 or 3.1.1, got '${printable(version)}'`);
  const level = opt('log-level') ?? 'info';
  if (!['trace', 'debug', 'info', 'warn', 'error'].includes(level)) {
    return usage(io, `--log-level must be trace, debug, info, warn or error, got '${printable(level)}'`);
  }
  if (Boolean(opt('cert')) !== Boolean(opt('key'))) return usage(io, '--cert and --key go together');
  const workers = parseWorkerSetting(opt('workers') ?? 'auto');
  if ('fault' in workers) return usage(io, `${workers.fault}, got '${printable(opt('workers') ?? '')}'`);
  const httpText = opt('http');
  const httpAddress = httpText === undefined ? null : parseHttpAddress(httpText);
  if (typeof httpAddress === 'string') return usage(io, httpAddress);

  const logger = createLogger({ pretty: parsed.values.pretty === true, level });
  let agent: Agent;
  let page: PageServer | null = null;
  try {
    const token = httpAddress ? await pageToken(process.env, io.cwd) : null;
    const connectOptions = await brokerCredentials(process.env, { ca: opt('ca'), cert: opt('cert'), key: opt('key') }, io.cwd);
    agent = await Agent.start(
      {
        mapPath: resolve(io.cwd, map),
        brokerUrl: opt('broker'),
        protocolVersion: version === '5' ? 5 : 4,
        clientId: opt('client-id'),
        watchMap: parsed.values['no-watch'] !== true,
        workers: workers.setting,
        connectOptions,
        stateDir: parsed.values['no-state'] === true ? null : resolve(io.cwd, opt('state-dir') ?? process.env.QBAND_STATE_DIR ?? 'qband-state'),
      },
      { logger },
    );
    if (httpAddress) {
      page = await startPageServer(agent, httpAddress, { logger, token }).catch(async (err: unknown) => {
        await agent.stop();
        throw err;
      });
    }
  } catch (err) {
    const code = reportFailure(io, 'run', err);
    logger.flush?.();
    return code;
  }
  await new Promise<void>((done) => {
    let stopping = false;
    const stop = (signal: string) => {
      if (stopping) return;
      stopping = true;
      logger.info({ stage: 'agent', code: 'QB_I_STOP', signal }, 'stopping');
      void (page?.close() ?? Promise.resolve()).then(() => agent.stop()).then(done);
    };
    process.once('SIGINT', () => stop('SIGINT'));
    process.once('SIGTERM', () => stop('SIGTERM'));
    // The reader of our output has gone: stop as cleanly as on SIGTERM.
    io.outputClosed?.addEventListener('abort', () => stop('EPIPE'), { once: true });
  });
  return EXIT_OK;
};

function usage(io: CliIo, message: string): number {
  return usageError(io, 'run', message, 'qband run --map <map.yaml> [options]');
}
