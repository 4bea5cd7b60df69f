/**
 * The deployment files read once for the deployment tests (test/deploymentFiles.test.ts reads
 * them, test/deploymentBroker.test.ts runs them): deploy/docker-compose.yml, deploy/Dockerfile,
 * deploy/mosquitto/{mosquitto.conf,acl} and deploy/map.example.yaml, with the small readers
 * that take them apart.
 */
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join, relative, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { parse as parseYaml } from 'yaml';
import { parseAssetMap } from '../../src/config/parseAssetMap.ts';
import type { SiteMap } from '../../src/config/types.ts';

export const REPO = fileURLToPath(new URL('../..', import.meta.url));
export const DEPLOY = join(REPO, 'deploy');
/** The compose file sits at the repository root; paths in it are relative to the root. */
export const COMPOSE_DIR = REPO;
export const COMPOSE_PATH = join(COMPOSE_DIR, 'docker-compose.yml');
export const read = (path: string) => readFileSync(path, 'utf8');

/** Files the compose file names that the operator creates on the box; never in the repo. */
export const CREATED_ON_THE_BOX = ['deploy/mosquitto/passwords', 'deploy/secrets/qband-agent.password'];

// ---- small readers -----------------------------------------------------------------------

export interface ComposeService {
  image?: string;
  hostname?: string;
  build?: { context: string; dockerfile: string };
  command?: string[];
  restart?: string;
  environment?: Record<string, string>;
  secrets?: string[];
  volumes?: string[];
}
export interface ComposeFile {
  services: Record<string, ComposeService>;
  secrets?: Record<string, { file: string }>;
  volumes?: Record<string, unknown>;
}

/** `${NAME:-default}` as docker compose interpolates it with NAME unset. */
export function interpolateDefaults(s: string): string {
  return s.replace(/\$\{[A-Z_][A-Z0-9_]*:-([^}]*)\}/g, '$1');
}

export interface Mount {
  source: string;
  target: string;
  readOnly: boolean;
  /** A path on the host (bind mount) rather than a named volume. */
  bind: boolean;
}

export function mountsOf(service: ComposeService): Mount[] {
  return (service.volumes ?? []).map((v) => {
    const [source, target, mode] = interpolateDefaults(v).split(':');
    return { source, target, readOnly: mode === 'ro', bind: /^[./~]/.test(source) };
  });
}

/** Repository-relative path of a path written relative to the compose file. */
export const fromCompose = (p: string) => relative(REPO, resolve(COMPOSE_DIR, p));

/** Mosquitto config as key -> values (a key may repeat). */
export function mosquittoConf(text: string): Map<string, string[]> {
  const conf = new Map<string, string[]>();
  for (const raw of text.split('\n')) {
    const line = raw.trim();
    if (line === '' || line.startsWith('#')) continue;
    const [key, ...rest] = line.split(/\s+/);
    conf.set(key, [...(conf.get(key) ?? []), rest.join(' ')]);
  }
  return conf;
}

export interface AclRules {
  read: string[];
  write: string[];
}

/** Mosquitto acl_file: per user, the filters it may read and write. '' holds rules before any `user` line. */
export function parseAcl(text: string): { users: Map<string, AclRules>; patternLines: string[] } {
  const users = new Map<string, AclRules>();
  const patternLines: string[] = [];
  let current = '';
  for (const raw of text.split('\n')) {
    const line = raw.trim();
    if (line === '' || line.startsWith('#')) continue;
    const words = line.split(/\s+/);
    if (words[0] === 'user') {
      current = words.slice(1).join(' ');
      users.set(current, users.get(current) ?? { read: [], write: [] });
    } else if (words[0] === 'topic') {
      const access = words.length > 2 ? words[1] : 'readwrite';
      const filter = words.length > 2 ? words.slice(2).join(' ') : words[1];
      const rules = users.get(current) ?? { read: [], write: [] };
      users.set(current, rules);
      if (access === 'read' || access === 'readwrite') rules.read.push(filter);
      if (access === 'write' || access === 'readwrite') rules.write.push(filter);
    } else if (words[0] === 'pattern') {
      patternLines.push(line);
    }
  }
  return { users, patternLines };
}

/** MQTT topic filter matching (MQTT 5.0 section 4.7): '+' one level, '#' the rest. */
export function filterMatches(filter: string, topic: string): boolean {
  const f = filter.split('/');
  const t = topic.split('/');
  for (let i = 0; i < f.length; i++) {
    if (f[i] === '#') return true;
    if (i >= t.length) return false;
    if (f[i] !== '+' && f[i] !== t[i]) return false;
  }
  return f.length === t.length;
}

/** Every input topic the agent subscribes to for this map (defaults as docs/asset-map.md gives them). */
export function inputTopics(map: SiteMap): string[] {
  const prefix = map.broker?.topicPrefix ?? 'qband';
  const topics: string[] = [];
  for (const asset of map.assets) {
    for (const sensor of asset.sensors) topics.push(sensor.topic ?? `${prefix}/${asset.id}/samples/${sensor.id}`);
    if (asset.speed.source === 'tach') topics.push(asset.speed.topic ?? `${prefix}/${asset.id}/samples/tach`);
    if (asset.speed.source === 'topic' && asset.speed.topic) topics.push(asset.speed.topic);
  }
  return topics;
}

export function walkFiles(dir: string): string[] {
  return readdirSync(dir).flatMap((name) => {
    if (name === 'node_modules' || name === '.git') return [];
    const path = join(dir, name);
    return statSync(path).isDirectory() ? walkFiles(path) : [path];
  });
}

// ---- the files ----------------------------------------------------------------------------

export const compose = parseYaml(read(COMPOSE_PATH)) as ComposeFile;
export const broker = compose.services.mosquitto;
export const agent = compose.services.qband;
export const brokerMount = (target: string) => mountsOf(broker).find((m) => m.target === target);
export const confMount = brokerMount('/mosquitto/config/mosquitto.conf')!;
export const confText = read(resolve(COMPOSE_DIR, confMount.source));
export const conf = mosquittoConf(confText);
export const aclTarget = conf.get('acl_file')?.[0] ?? '';
export const aclMount = brokerMount(aclTarget);
export const aclText = aclMount ? read(resolve(COMPOSE_DIR, aclMount.source)) : '';
export const acl = parseAcl(aclText);
export const mapMount = mountsOf(agent).find((m) => m.target === '/etc/qband/map.yaml');
export const mapResult = mapMount ? parseAssetMap(read(resolve(COMPOSE_DIR, mapMount.source)), mapMount.source) : undefined;
export const siteMap = mapResult?.map ?? undefined;
export const agentUser = agent.environment?.QBAND_MQTT_USERNAME ?? '';
export const prefix = siteMap?.broker?.topicPrefix ?? 'qband';
