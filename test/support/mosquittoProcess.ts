/**
 * A private Mosquitto broker for integration tests: its own process on a free loopback port,
 * with a generated config (or an adopted one, such as the committed deployment config), a
 * password file, an ACL and TLS certificates made fresh in a temp dir. The system broker that
 * may already listen on 1883 is never used or touched.
 *
 * Readiness is two facts together: Mosquitto has logged that it is running (so the listener is
 * ours, not another process's on a reused port) and the port accepts a TCP connection.
 */
import { execFileSync, spawn, type ChildProcess } from 'node:child_process';
import { createWriteStream, mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { createServer, connect } from 'node:net';
import { tmpdir, userInfo } from 'node:os';
import { basename, join } from 'node:path';

export const MOSQUITTO_BIN = process.env.QBAND_TEST_MOSQUITTO ?? '/usr/sbin/mosquitto';
export const MOSQUITTO_PASSWD_BIN = process.env.QBAND_TEST_MOSQUITTO_PASSWD ?? 'mosquitto_passwd';

export interface MosquittoOptions {
  /** Users and their passwords (a password file is made with mosquitto_passwd); no anonymous access. */
  auth?: { users: Record<string, string>; acl?: string };
  /** A TLS listener with a throwaway CA; `requireCertificate` asks clients for the client cert. */
  tls?: boolean | { requireCertificate: boolean };
  /** Keep the message store in the temp dir across restart(). */
  persistence?: boolean;
  /** Listen on this port instead of a free one (to start a second broker where a first one was). */
  port?: number;
  /**
   * Run this Mosquitto config instead of a generated one. Its single `listener` is moved to the
   * harness port on 127.0.0.1, logging goes to the harness, and every file path it names
   * (password_file, acl_file, persistence_location, cafile, certfile, keyfile, bridge_*file)
   * is replaced by the same file name in the temp dir, where `files` (name -> content) go. With
   * `auth`, the password file and ACL are written under the names the config gives them.
   */
  conf?: { text: string; files?: Record<string, string> };
  /** Bounded wait for readiness, ms (default 10000). */
  startTimeoutMs?: number;
}

export interface TlsFiles {
  ca: string;
  caKey: string;
  serverCert: string;
  serverKey: string;
  clientCert: string;
  clientKey: string;
}

export interface MosquittoBroker {
  /** mqtt://127.0.0.1:<port>, or mqtts:// with TLS. */
  url: string;
  port: number;
  host: '127.0.0.1';
  /** CA certificate path (TLS only). */
  ca?: string;
  clientCert?: string;
  clientKey?: string;
  /** The temp dir holding config, passwords, ACL, certificates, store and log. */
  dir: string;
  /** The generated (or rewritten) config text that is running. */
  configText: string;
  /** Stops the broker (SIGTERM, SIGKILL after a bounded wait) and removes the temp dir. */
  stop(): Promise<void>;
  /** Sends a signal (default SIGKILL) without cleaning up: a broker crash. stop() still cleans up. */
  kill(signal?: NodeJS.Signals): void;
  /** Stops the process (SIGTERM: a persistent store is written), keeping the temp dir; restart() starts it again. */
  halt(): Promise<void>;
  /** Stops the process if it runs (keeping the temp dir and store) and starts it again on the same port. */
  restart(): Promise<void>;
  /** The last lines Mosquitto logged. */
  logTail(lines?: number): string;
}

const STOP_GRACE_MS = 3000;
const LIVE = new Set<ChildProcess>();
let exitHookInstalled = false;

/** True where the Mosquitto binary and mosquitto_passwd can be run; suites skip otherwise. */
export function mosquittoAvailable(): boolean {
  return canRun(MOSQUITTO_BIN, ['-h']) && canRun(MOSQUITTO_PASSWD_BIN, ['-h']);
}

/** True where openssl can be run (TLS tests skip otherwise). */
export function opensslAvailable(): boolean {
  return canRun('openssl', ['version']);
}

/** A program can be run when it starts at all: `-h` makes both Mosquitto tools exit 1 or 3. */
function canRun(program: string, args: string[]): boolean {
  try {
    execFileSync(program, args, { stdio: 'ignore', timeout: 5000 });
    return true;
  } catch (e) {
    return typeof (e as { status?: unknown }).status === 'number';
  }
}

/** A port the kernel just handed out on 127.0.0.1 and released again. */
export async function freeLoopbackPort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const server = createServer();
    server.unref();
    server.on('error', reject);
    server.listen(0, '127.0.0.1', () => {
      const address = server.address();
      server.close(() => (typeof address === 'object' && address ? resolve(address.port) : reject(new Error('no port'))));
    });
  });
}

function openssl(dir: string, args: string[]): void {
  try {
    execFileSync('openssl', args, { cwd: dir, stdio: ['ignore', 'ignore', 'pipe'] });
  } catch (e) {
    const stderr = (e as { stderr?: Buffer }).stderr?.toString() ?? '';
    throw new Error(`openssl ${args.join(' ')} failed: ${stderr}`);
  }
}

/**
 * A throwaway CA (EC P-256, valid 2 days) and, signed by it, a server certificate for
 * 127.0.0.1 and localhost (subjectAltName) and a client certificate. `name` keeps two CAs made
 * in one dir apart.
 */
export function generateTlsFiles(dir: string, name = 'test'): TlsFiles {
  const p = (f: string) => join(dir, `${name}-${f}`);
  const ec = ['-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:P-256', '-nodes'];
  openssl(dir, ['req', '-x509', ...ec, '-keyout', p('ca.key'), '-out', p('ca.crt'), '-days', '2', '-subj', `/CN=qband ${name} CA`,
    '-addext', 'basicConstraints=critical,CA:TRUE', '-addext', 'keyUsage=critical,keyCertSign,cRLSign']);
  const leaf = (leafName: string, cn: string, ext: string) => {
    writeFileSync(p(`${leafName}.ext`), ext);
    openssl(dir, ['req', ...ec, '-keyout', p(`${leafName}.key`), '-out', p(`${leafName}.csr`), '-subj', `/CN=${cn}`]);
    openssl(dir, ['x509', '-req', '-in', p(`${leafName}.csr`), '-CA', p('ca.crt'), '-CAkey', p('ca.key'), '-CAcreateserial',
      '-out', p(`${leafName}.crt`), '-days', '2', '-extfile', p(`${leafName}.ext`)]);
  };
  leaf('server', 'localhost', 'basicConstraints=CA:FALSE\nkeyUsage=critical,digitalSignature\nextendedKeyUsage=serverAuth\nsubjectAltName=IP:127.0.0.1,DNS:localhost\n');
  leaf('client', 'qband-test-client', 'basicConstraints=CA:FALSE\nkeyUsage=critical,digitalSignature\nextendedKeyUsage=clientAuth\n');
  return {
    ca: p('ca.crt'), caKey: p('ca.key'),
    serverCert: p('server.crt'), serverKey: p('server.key'),
    clientCert: p('client.crt'), clientKey: p('client.key'),
  };
}

function writePasswordFile(path: string, users: Record<string, string>): void {
  for (const user of Object.keys(users)) {
    if (user.includes(':') || user === '') throw new Error(`mosquitto user name '${user}' is empty or contains ':'`);
  }
  writeFileSync(path, Object.entries(users).map(([u, pw]) => `${u}:${pw}\n`).join(''), { mode: 0o600 });
  // -U hashes every plain-text password in the file in place.
  execFileSync(MOSQUITTO_PASSWD_BIN, ['-U', path], { stdio: ['ignore', 'ignore', 'pipe'] });
}

const PATH_KEYS = ['password_file', 'acl_file', 'persistence_location', 'cafile', 'certfile', 'keyfile', 'capath', 'crlfile', 'dhparamfile',
  'bridge_cafile', 'bridge_certfile', 'bridge_keyfile', 'bridge_capath'];
const DROPPED_KEYS = ['port', 'bind_address', 'bind_interface', 'socket_domain', 'log_dest', 'pid_file', 'user', 'include_dir'];

/** The config named by `conf`, moved into `dir` and onto `port`; also returns the names it gives its files. */
export function adoptConfig(text: string, dir: string, port: number): { text: string; passwordFile?: string; aclFile?: string } {
  const out: string[] = [];
  let listeners = 0;
  let passwordFile: string | undefined;
  let aclFile: string | undefined;
  for (const raw of text.split('\n')) {
    const line = raw.trim();
    const [key, ...rest] = line.split(/\s+/);
    if (line === '' || line.startsWith('#')) {
      out.push(raw);
    } else if (key === 'listener') {
      listeners += 1;
      if (listeners > 1) throw new Error('adoptConfig: the config has more than one listener; the harness moves exactly one');
      out.push(`listener ${port} 127.0.0.1`);
    } else if (DROPPED_KEYS.includes(key)) {
      out.push(`# (harness) ${line}`);
    } else if (PATH_KEYS.includes(key)) {
      const name = basename(rest.join(' '));
      const local = key === 'persistence_location' ? `${dir}/` : join(dir, name);
      if (key === 'password_file') passwordFile = local;
      if (key === 'acl_file') aclFile = local;
      out.push(`${key} ${local}`);
    } else {
      out.push(raw);
    }
  }
  if (listeners === 0) out.unshift(`listener ${port} 127.0.0.1`);
  out.push(...harnessLines());
  return { text: out.join('\n') + '\n', passwordFile, aclFile };
}

function harnessLines(): string[] {
  // Logs go to stderr (unbuffered), which the harness captures; `user` keeps file access in the temp dir
  // (as root Mosquitto would otherwise switch to the 'mosquitto' user).
  return ['log_dest stderr', 'log_type error', 'log_type warning', 'log_type notice', 'log_type information',
    'connection_messages true', `user ${userInfo().username}`];
}

function generatedConfig(opts: MosquittoOptions, dir: string, port: number, tls: TlsFiles | undefined): string {
  const lines = [`listener ${port} 127.0.0.1`];
  if (tls) {
    const require = typeof opts.tls === 'object' && opts.tls.requireCertificate;
    lines.push(`cafile ${tls.ca}`, `certfile ${tls.serverCert}`, `keyfile ${tls.serverKey}`, `require_certificate ${require ? 'true' : 'false'}`);
  }
  if (opts.auth) {
    lines.push('allow_anonymous false', `password_file ${join(dir, 'passwords')}`);
    if (opts.auth.acl !== undefined) lines.push(`acl_file ${join(dir, 'acl')}`);
  } else {
    lines.push('allow_anonymous true');
  }
  lines.push(opts.persistence ? `persistence true\npersistence_location ${dir}/\nautosave_interval 0` : 'persistence false');
  lines.push(...harnessLines());
  return lines.join('\n') + '\n';
}

/** Starts a private Mosquitto; resolves once it runs and its port accepts connections. */
export async function startMosquitto(opts: MosquittoOptions = {}): Promise<MosquittoBroker> {
  const dir = mkdtempSync(join(tmpdir(), 'qband-mosquitto-'));
  try {
    return await startIn(dir, opts);
  } catch (e) {
    rmSync(dir, { recursive: true, force: true });
    throw e;
  }
}

async function startIn(dir: string, opts: MosquittoOptions): Promise<MosquittoBroker> {
  const port = opts.port ?? (await freeLoopbackPort());
  const tls = opts.tls ? generateTlsFiles(dir) : undefined;
  let configText: string;
  if (opts.conf) {
    const adopted = adoptConfig(opts.conf.text, dir, port);
    configText = adopted.text;
    for (const [name, content] of Object.entries(opts.conf.files ?? {})) writeFileSync(join(dir, basename(name)), content);
    if (opts.auth) {
      if (!adopted.passwordFile) throw new Error('startMosquitto: auth users given but the adopted config has no password_file');
      writePasswordFile(adopted.passwordFile, opts.auth.users);
      if (opts.auth.acl !== undefined) {
        if (!adopted.aclFile) throw new Error('startMosquitto: an ACL given but the adopted config has no acl_file');
        writeFileSync(adopted.aclFile, opts.auth.acl);
      }
    }
  } else {
    configText = generatedConfig(opts, dir, port, tls);
    if (opts.auth) {
      writePasswordFile(join(dir, 'passwords'), opts.auth.users);
      if (opts.auth.acl !== undefined) writeFileSync(join(dir, 'acl'), opts.auth.acl);
    }
  }
  const confPath = join(dir, 'mosquitto.conf');
  writeFileSync(confPath, configText);
  const logPath = join(dir, 'mosquitto.log');
  const timeoutMs = opts.startTimeoutMs ?? 10_000;

  let log = '';
  let child: ChildProcess | undefined;
  let exited: Promise<void> = Promise.resolve();

  const launch = async (): Promise<void> => {
    const logFile = createWriteStream(logPath, { flags: 'a' });
    const startAt = log.length;
    const proc = spawn(MOSQUITTO_BIN, ['-c', confPath], { stdio: ['ignore', 'pipe', 'pipe'] });
    child = proc;
    LIVE.add(proc);
    installExitHook();
    const onData = (chunk: Buffer) => {
      log += chunk.toString();
      if (log.length > 200_000) log = log.slice(-100_000);
      logFile.write(chunk);
    };
    proc.stdout!.on('data', onData);
    proc.stderr!.on('data', onData);
    let exitInfo: string | undefined;
    exited = new Promise((resolve) => {
      proc.on('exit', (code, signal) => {
        exitInfo = `exited with ${signal ?? `code ${code}`}`;
        LIVE.delete(proc);
        logFile.end();
        resolve();
      });
    });
    proc.on('error', (e) => {
      exitInfo = `could not be started: ${e.message}`;
    });
    const deadline = Date.now() + timeoutMs;
    for (;;) {
      if (exitInfo) throw new Error(`mosquitto ${exitInfo} before listening on 127.0.0.1:${port}\n--- config ${confPath}\n${configText}--- log\n${tail(log, 20)}`);
      const running = / running\b/.test(log.slice(startAt));
      if (running && (await accepts(port))) return;
      if (Date.now() > deadline) {
        proc.kill('SIGKILL');
        throw new Error(`mosquitto did not accept connections on 127.0.0.1:${port} within ${timeoutMs} ms\n--- log\n${tail(log, 20)}`);
      }
      await sleep(25);
    }
  };

  const halt = async (): Promise<void> => {
    const proc = child;
    if (!proc || proc.exitCode !== null || proc.signalCode !== null) return;
    proc.kill('SIGTERM');
    const timer = setTimeout(() => proc.kill('SIGKILL'), STOP_GRACE_MS);
    await exited;
    clearTimeout(timer);
  };

  await launch();
  return {
    url: `${tls ? 'mqtts' : 'mqtt'}://127.0.0.1:${port}`,
    port,
    host: '127.0.0.1',
    ...(tls ? { ca: tls.ca, clientCert: tls.clientCert, clientKey: tls.clientKey } : {}),
    dir,
    configText,
    async stop() {
      try {
        await halt();
      } finally {
        rmSync(dir, { recursive: true, force: true });
      }
    },
    kill(signal: NodeJS.Signals = 'SIGKILL') {
      child?.kill(signal);
    },
    halt,
    async restart() {
      await halt();
      await exited;
      await launch();
    },
    logTail(lines = 20) {
      return tail(log, lines);
    },
  };
}

function tail(text: string, lines: number): string {
  return text.trimEnd().split('\n').slice(-lines).join('\n') + '\n';
}

function sleep(ms: number): Promise<void> {
  return new Promise((resolve) => setTimeout(resolve, ms));
}

function accepts(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = connect({ host: '127.0.0.1', port });
    const done = (ok: boolean) => {
      socket.destroy();
      resolve(ok);
    };
    socket.setTimeout(500, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

/** A test run that ends early (a failed assertion, a crash) must not leave brokers behind. */
function installExitHook(): void {
  if (exitHookInstalled) return;
  exitHookInstalled = true;
  process.on('exit', () => {
    for (const proc of LIVE) proc.kill('SIGKILL');
  });
}
