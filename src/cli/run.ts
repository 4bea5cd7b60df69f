/**
 * `qband run`: the live agent. Wires the real logger, clock and MQTT connector into the agent,
 * and stops it cleanly on SIGINT or SIGTERM.
 */
import { resolve } from 'node:path';
import { parseArgs } from 'node:util';
import { Agent } from '../agent/agent.ts';
import { brokerCredentials } from '../agent/credentials.ts';
import { createLogger } from '../agent/logger.ts';
import { QbandError } from '../errors.ts';
import { EXIT_INVALID, EXIT_OK, type CliIo, type Command } from './io.ts';
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
  --pretty                readable logs for people instead of JSON lines
  --log-level <level>     trace, debug, info (default), warn, error
  -h, --help              this text

Credentials never go in the map: QBAND_MQTT_USERNAME with QBAND_MQTT_PASSWORD or
QBAND_MQTT_PASSWORD_FILE (a file holding the password) from the environment.

Example:
  QBAND_MQTT_USERNAME=qband-agent QBAND_MQTT_PASSWORD_FILE=/run/secrets/mqtt \\
    qband run --map /etc/qband/map.yaml --broker mqtt://127.0.0.1:1883

qband advises only: it never stops a machine and never publishes to a machine's controls.
Any response follows the site's procedures, local codes and licensed practice.
`;

export const runRun: Command = async (args, io) => {
  let values;
  try {
    ({ values } = parseArgs({
      args,
      allowPositionals: false,
      options: {
        map: { type: 'string' },
        broker: { type: 'string' },
        'mqtt-version': { type: 'string', default: '5' },
        'client-id': { type: 'string' },
        ca: { type: 'string' },
        cert: { type: 'string' },
        key: { type: 'string' },
        'no-watch': { type: 'boolean' },
        'state-dir': { type: 'string' },
        'no-state': { type: 'boolean' },
        pretty: { type: 'boolean' },
        'log-level': { type: 'string', default: 'info' },
        help: { type: 'boolean', short: 'h' },
      },
    }));
  } catch (err) {
    return usage(io, (err as Error).message);
  }
  if (values.help) {
    io.stdout.write(RUN_HELP);
    return EXIT_OK;
  }
  if (!values.map) return usage(io, 'missing --map <map.yaml>');
  const version = values['mqtt-version'];
  if (version !== '5' && version !== '3.1.1') return usage(io, `--mqtt-version must be 5 or 3.1.1, got '${version}'`);
  if (!['trace', 'debug', 'info', 'warn', 'error'].includes(values['log-level'] as string)) {
    return usage(io, `--log-level must be trace, debug, info, warn or error, got '${values['log-level']}'`);
  }
  if (Boolean(values.cert) !== Boolean(values.key)) return usage(io, '--cert and --key go together');

  const logger = createLogger({ pretty: values.pretty, level: values['log-level'] });
  let agent: Agent;
  try {
    const connectOptions = await brokerCredentials(process.env, { ca: values.ca, cert: values.cert, key: values.key }, io.cwd);
    agent = await Agent.start(
      {
        mapPath: resolve(io.cwd, values.map),
        brokerUrl: values.broker,
        protocolVersion: version === '5' ? 5 : 4,
        clientId: values['client-id'],
        watchMap: !values['no-watch'],
        connectOptions,
        stateDir: values['no-state'] ? null : resolve(io.cwd, values['state-dir'] ?? process.env.QBAND_STATE_DIR ?? 'qband-state'),
      },
      { logger },
    );
  } catch (err) {
    const code = err instanceof QbandError ? err.code : 'QB_E_INTERNAL';
    io.stderr.write(`qband run: ${(err as Error).message} [${code}]\n`);
    logger.flush?.();
    return EXIT_INVALID;
  }
  await new Promise<void>((done) => {
    const stop = (signal: string) => {
      logger.info({ stage: 'agent', code: 'QB_I_STOP', signal }, 'stopping');
      void agent.stop().then(done);
    };
    process.once('SIGINT', () => stop('SIGINT'));
    process.once('SIGTERM', () => stop('SIGTERM'));
  });
  return EXIT_OK;
};

function usage(io: CliIo, message: string): number {
  return usageError(io, 'run', message, 'qband run --map <map.yaml> [options]');
}
