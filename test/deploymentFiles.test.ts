/**
 * The deployment files agree with each other and with the program, without Docker:
 * deploy/docker-compose.yml, deploy/Dockerfile, deploy/mosquitto/{mosquitto.conf,acl} and
 * deploy/map.example.yaml (read in test/support/deploymentFiles.ts). The committed broker config
 * and ACL run for real in test/deploymentBroker.test.ts.
 */
import { execFileSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { join, relative, resolve } from 'node:path';
import { describe, expect, it } from 'vitest';
import { topLevelHelp } from '../src/cli/main.ts';
import type { CliIo } from '../src/cli/io.ts';
import {
  acl, aclTarget, aclText, agent, agentUser, broker, brokerMount, compose, COMPOSE_DIR, COMPOSE_PATH, conf, CREATED_ON_THE_BOX,
  DEPLOY, filterMatches, fromCompose, inputTopics, interpolateDefaults, mapMount, mapResult, mountsOf, prefix, read, REPO, siteMap, walkFiles,
} from './support/deploymentFiles.ts';

describe('deployment files agree', () => {
  it('names a Mosquitto 2 broker and the qband agent, both restarted by Docker', () => {
    expect(broker.image).toMatch(/^eclipse-mosquitto:2(\.|$)/);
    expect(broker.restart).toMatch(/^(always|unless-stopped|on-failure)/);
    expect(agent.restart).toMatch(/^(always|unless-stopped|on-failure)/);
  });

  it('gives the agent a fixed hostname, so its default client id survives re-creating the container', () => {
    const command = agent.command ?? [];
    expect(command.includes('--client-id') || (agent.hostname !== undefined && interpolateDefaults(agent.hostname) !== '')).toBe(true);
  });

  it('every file it mounts or references exists in the repo, or is one the operator creates and git ignores', () => {
    const referenced = [
      ...Object.values(compose.services).flatMap((s) => mountsOf(s).filter((m) => m.bind).map((m) => fromCompose(m.source))),
      ...Object.values(compose.secrets ?? {}).map((s) => fromCompose(s.file)),
      fromCompose(join(agent.build!.context, agent.build!.dockerfile)),
    ];
    const missing = referenced.filter((p) => !existsSync(join(REPO, p)) && !CREATED_ON_THE_BOX.includes(p));
    expect(missing, `referenced by ${relative(REPO, COMPOSE_PATH)} but absent`).toEqual([]);
    expect(referenced).toEqual(expect.arrayContaining(['deploy/mosquitto/mosquitto.conf', 'deploy/mosquitto/acl', 'deploy/map.example.yaml', 'deploy/Dockerfile']));

    const ignore = read(join(DEPLOY, '.gitignore')).split('\n').map((l) => l.trim()).filter((l) => l && !l.startsWith('#'));
    const ignored = (p: string) => ignore.some((rule) => { const r = 'deploy' + rule.replace(/\/$/, ''); return p === r || p.startsWith(r + '/'); });
    for (const p of CREATED_ON_THE_BOX) {
      expect(referenced, `${p} is listed as created on the box but the compose file never names it`).toContain(p);
      expect(ignored(p), `${p} must be listed in deploy/.gitignore`).toBe(true);
    }
  });

  it('Mosquitto: no anonymous access, a password file and an ACL file, both mounted read-only', () => {
    expect(conf.get('allow_anonymous')).toEqual(['false']);
    const passwordFile = conf.get('password_file')?.[0];
    expect(passwordFile, 'password_file').toBeDefined();
    expect(aclTarget, 'acl_file').not.toBe('');
    for (const target of [passwordFile!, aclTarget]) {
      const mount = brokerMount(target);
      expect(mount, `${target} is not mounted into the mosquitto service`).toBeDefined();
      expect(mount!.readOnly, `${target} should be mounted :ro`).toBe(true);
    }
    const store = conf.get('persistence_location')?.[0];
    expect(conf.get('persistence')).toEqual(['true']);
    expect(mountsOf(broker).some((m) => !m.bind && store?.startsWith(m.target)), `persistence_location ${store} is not on a volume`).toBe(true);
  });

  it('the ACL has no anonymous rules and gives the agent write access only under its prefix', () => {
    expect(acl.users.has(''), 'topic lines before the first user line apply to anonymous clients').toBe(false);
    expect(acl.patternLines, 'pattern lines apply to every user').toEqual([]);
    const rules = acl.users.get(agentUser);
    expect(rules, `no ACL block for the agent user '${agentUser}'`).toBeDefined();
    expect(rules!.write.length).toBeGreaterThan(0);
    for (const filter of rules!.write) expect(filter.startsWith(`${prefix}/`), `agent may write '${filter}'`).toBe(true);
  });

  it('the map is valid, its input topics lie outside the prefix, and the ACL lets the agent read them and the gateway write them', () => {
    expect(mapResult?.problems ?? ['map not mounted'], 'map problems').toEqual([]);
    const topics = inputTopics(siteMap!);
    expect(topics.length).toBeGreaterThan(0);
    const agentRules = acl.users.get(agentUser)!;
    const gateway = acl.users.get('qband-gateway');
    expect(gateway, 'no ACL block for qband-gateway').toBeDefined();
    for (const topic of topics) {
      expect(topic.startsWith(`${prefix}/`), `input ${topic} under ${prefix}/ would be bridged off the box with qband/#`).toBe(false);
      expect(agentRules.read.some((f) => filterMatches(f, topic)), `agent cannot read ${topic}`).toBe(true);
      expect(gateway!.write.some((f) => filterMatches(f, topic)), `gateway cannot write ${topic}`).toBe(true);
    }
    for (const asset of siteMap!.assets) {
      expect(agentRules.read.some((f) => filterMatches(f, `${prefix}/${asset.id}/command`)), `agent cannot read ${prefix}/${asset.id}/command`).toBe(true);
    }
    expect(gateway!.read).toEqual([]);
    expect(gateway!.write.every((f) => !filterMatches(f, `${prefix}/x/alarm`))).toBe(true);
    const operator = acl.users.get('qband-operator');
    expect(operator).toEqual({ read: [`${prefix}/#`], write: [`${prefix}/+/command`] });
  });

  it('the agent gets its password from a secret file, never from the compose file', () => {
    const env = agent.environment ?? {};
    expect(Object.keys(env).filter((k) => /PASSWORD/.test(k) && !k.endsWith('_FILE'))).toEqual([]);
    const secretPath = env.QBAND_MQTT_PASSWORD_FILE ?? '';
    const secretName = secretPath.replace(/^\/run\/secrets\//, '');
    expect(secretPath).toBe(`/run/secrets/${secretName}`);
    expect(agent.secrets).toContain(secretName);
    expect(compose.secrets?.[secretName]?.file).toBeDefined();
  });

  it('the image is built on Node 20 from existing paths, each let into the build context', () => {
    const dockerfile = read(resolve(COMPOSE_DIR, agent.build!.context, agent.build!.dockerfile));
    expect(dockerfile).toMatch(/^FROM node:20[-.\w]*\s*$/m);
    expect(dockerfile).toMatch(/npm ci --omit=dev/);
    const ignore = read(resolve(COMPOSE_DIR, agent.build!.context, `${agent.build!.dockerfile}.dockerignore`));
    const allowed = [...ignore.matchAll(/^!(\S+?)\/?$/gm)].map((m) => m[1]);
    for (const m of dockerfile.matchAll(/^COPY\s+(?!--from)(.+)\s+\S+\s*$/gm)) {
      for (const src of m[1].split(/\s+/)) {
        expect(existsSync(resolve(COMPOSE_DIR, agent.build!.context, src)), `COPY ${src}`).toBe(true);
        expect(allowed, `COPY ${src} is kept out of the build context by the .dockerignore`).toContain(src.replace(/\/$/, ''));
      }
    }
  });

  it('the image runs the compiled build (a build stage compiles with npm ci, the image holds its dist/ and no compiler) with the compose file\'s command', () => {
    const dockerfile = read(resolve(COMPOSE_DIR, agent.build!.context, agent.build!.dockerfile));
    const stages = dockerfile.split(/^(?=FROM\s)/m).filter((s) => s.startsWith('FROM'));
    expect(stages.length, 'a build stage and the image').toBe(2);
    const [build, image] = stages;
    const buildName = /^FROM\s+\S+\s+AS\s+(\S+)/i.exec(build)?.[1];
    expect(buildName, 'the build stage is named').toBeDefined();
    // npm ci with dev dependencies runs `prepare`, which is the build (package.json).
    const pkg = JSON.parse(read(join(REPO, 'package.json'))) as { scripts: Record<string, string>; devDependencies: Record<string, string> };
    expect(pkg.scripts.prepare).toBe('npm run build');
    expect(build).toMatch(/^RUN npm ci(?![^\n]*--omit=dev)(?![^\n]*--ignore-scripts)/m);
    for (const src of ['src', 'scripts']) expect(build, `build stage copies ${src}`).toContain(src);
    expect(image).toMatch(new RegExp(`^COPY --from=${buildName} \\S+/dist \\./dist\\s*$`, 'm'));
    expect(image, 'the image installs production dependencies only, without running the build').toMatch(/^RUN npm ci --omit=dev --ignore-scripts/m);
    expect(image, 'no TypeScript sources in the image').not.toMatch(/^COPY src\b/m);
    expect(Object.keys(pkg.devDependencies)).toEqual(expect.arrayContaining(['typescript', 'tsx']));
    const cmd = /^CMD\s+(\[.*\])\s*$/m.exec(dockerfile);
    expect(cmd, 'Dockerfile CMD in exec form').not.toBeNull();
    expect(JSON.parse(cmd![1])).toEqual(agent.command);
    expect(dockerfile, 'the state directory').toMatch(/\/var\/lib\/qband/);
    expect(mountsOf(agent).find((m) => m.target === '/var/lib/qband')?.bind).toBe(false);
  });

  it('production dependencies hold every package the program imports (npm ci --omit=dev is enough)', () => {
    const pkg = JSON.parse(read(join(REPO, 'package.json'))) as { dependencies: Record<string, string> };
    const files = [...walkFiles(join(REPO, 'src')), ...walkFiles(join(REPO, 'bin'))].filter((f) => /\.(ts|mjs)$/.test(f));
    const missing = new Set<string>();
    for (const f of files) {
      const text = read(f);
      for (const m of text.matchAll(/(?:^\s*(?:import|export)[^'"]*?from\s+|import\(\s*)['"]([^'".][^'"]*)['"]/gm)) {
        const spec = m[1];
        if (spec.startsWith('node:')) continue;
        const name = spec.startsWith('@') ? spec.split('/').slice(0, 2).join('/') : spec.split('/')[0];
        if (!(name in pkg.dependencies)) missing.add(`${name} (${relative(REPO, f)})`);
      }
    }
    expect([...missing]).toEqual([]);
  });

  it('the agent command is a qband command with the mounted map', async () => {
    const command = agent.command ?? [];
    expect(command.slice(0, 2)).toEqual(['node', 'bin/qband.mjs']);
    expect(existsSync(join(REPO, command[1]))).toBe(true);
    const mapArg = command[command.indexOf('--map') + 1];
    expect(command.indexOf('--map')).toBeGreaterThan(2);
    expect(mapArg).toBe(mapMount?.target);
    const name = command[2];
    const commands = [...topLevelHelp().matchAll(/^ {2}(\S+) {2,}/gm)].map((m) => m[1]);
    if (!commands.includes(name) && name === 'run' && !existsSync(join(REPO, 'src/cli/run.ts'))) {
      // The live agent's command lands in src/cli/run.ts; until then it cannot be checked.
      console.warn('deploymentFiles.test.ts: `qband run` is not in the CLI yet (no src/cli/run.ts); command name not checked');
      return;
    }
    expect(commands, `'${name}' is not a qband command`).toContain(name);
    let help = '';
    const io: CliIo = { cwd: REPO, stdout: { write: (s: string) => void (help += s) }, stderr: { write: (s: string) => void (help += s) } } as CliIo;
    const { main } = await import('../src/cli/main.ts');
    await main([name, '--help'], io);
    expect(help, `qband ${name} --help`).toContain('--map');
  });

  it('the docs quote the committed ACL and bridge exactly', () => {
    const significant = (text: string) => text.split('\n').map((l) => l.trim()).filter((l) => l !== '' && !l.startsWith('#'));
    const quoted = (doc: string) => [...read(join(REPO, 'docs', doc)).matchAll(/```\n([\s\S]*?)```/g)].map((m) => significant(m[1]).join('\n'));
    expect(quoted('deployment.md'), 'docs/deployment.md quotes deploy/mosquitto/acl').toContain(significant(aclText).join('\n'));
    const bridge = significant(read(join(DEPLOY, 'mosquitto/bridge.conf.example'))).join('\n');
    expect(quoted('fleet.md'), 'docs/fleet.md quotes deploy/mosquitto/bridge.conf.example').toContain(bridge);
  });

  it('no secret value is committed under deploy/ or docs/', () => {
    const files = [...walkFiles(DEPLOY), COMPOSE_PATH, ...(existsSync(join(REPO, 'docs')) ? walkFiles(join(REPO, 'docs')) : [])]
      .filter((f) => !CREATED_ON_THE_BOX.includes(relative(REPO, f)));
    const findings: string[] = [];
    for (const f of files) {
      const text = read(f);
      if (/-----BEGIN [A-Z ]*PRIVATE KEY-----/.test(text)) findings.push(`${relative(REPO, f)}: a private key`);
      // mosquitto_passwd hashes: user:$7$... (PBKDF2-SHA512) or user:$6$... (SHA512).
      if (/^[^#\s:]+:\$[67]\$/m.test(text)) findings.push(`${relative(REPO, f)}: a password hash`);
      if (/QBAND_MQTT_PASSWORD\s*[:=]\s*['"]?[^\s'"$<{]/.test(text)) findings.push(`${relative(REPO, f)}: QBAND_MQTT_PASSWORD with a value`);
    }
    expect(findings).toEqual([]);
    const mapText = mapMount ? read(resolve(COMPOSE_DIR, mapMount.source)) : '';
    expect(mapText).not.toMatch(/password|username/i);
  });
});

// git must not track the files the operator creates (a clone without .git skips this).
describe.skipIf(!existsSync(join(REPO, '.git')))('deployment: nothing created on the box is tracked', () => {
  it('git tracks none of the password or secret files', () => {
    const tracked = execFileSync('git', ['ls-files', '--', ...CREATED_ON_THE_BOX, 'deploy/secrets'], { cwd: REPO, encoding: 'utf8' });
    expect(tracked.trim()).toBe('');
  });
});
