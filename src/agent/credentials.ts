/**
 * Broker credentials and TLS material for the agent's connection, from the environment and
 * files, never from the map (maps are shared and versioned) and never logged or published.
 *
 *   QBAND_MQTT_USERNAME         user name
 *   QBAND_MQTT_PASSWORD         password, or
 *   QBAND_MQTT_PASSWORD_FILE    a file whose first line is the password (Docker/systemd secrets)
 *   --ca / --cert / --key       PEM files for mqtts://; the server's name is always checked
 */
import { readFile } from 'node:fs/promises';
import { resolve } from 'node:path';
import type { IClientOptions } from 'mqtt';
import { QbandError } from '../errors.ts';

export async function brokerCredentials(
  env: Record<string, string | undefined>,
  tls: { ca?: string; cert?: string; key?: string },
  cwd: string,
): Promise<Partial<IClientOptions>> {
  const options: Partial<IClientOptions> = {};
  const username = env.QBAND_MQTT_USERNAME;
  let password = env.QBAND_MQTT_PASSWORD;
  if (env.QBAND_MQTT_PASSWORD_FILE) {
    if (password !== undefined) {
      throw new QbandError('QB_E_CREDENTIALS', 'set QBAND_MQTT_PASSWORD or QBAND_MQTT_PASSWORD_FILE, not both');
    }
    password = (await readSecret(env.QBAND_MQTT_PASSWORD_FILE, cwd, 'QBAND_MQTT_PASSWORD_FILE')).split(/\r?\n/)[0];
  }
  if (password !== undefined && username === undefined) {
    throw new QbandError('QB_E_CREDENTIALS', 'a password was given but no QBAND_MQTT_USERNAME');
  }
  if (username !== undefined) options.username = username;
  if (password !== undefined) options.password = password;
  if (tls.ca) options.ca = await readSecret(tls.ca, cwd, '--ca');
  if (tls.cert) options.cert = await readSecret(tls.cert, cwd, '--cert');
  if (tls.key) options.key = await readSecret(tls.key, cwd, '--key');
  if (tls.ca || tls.cert) options.rejectUnauthorized = true;
  return options;
}

async function readSecret(path: string, cwd: string, what: string): Promise<string> {
  try {
    return await readFile(resolve(cwd, path), 'utf8');
  } catch (err) {
    // The path is named; the content never is.
    throw new QbandError('QB_E_CREDENTIALS', `cannot read ${what} file '${path}' (${(err as NodeJS.ErrnoException).code ?? err})`);
  }
}
