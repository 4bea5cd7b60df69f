/**
 * `qband run` as a child process for tests with real processes: its JSON log lines (stderr)
 * read back, its exit awaited, and a kill registered for the test's clean-up.
 */
import { spawn, type ChildProcess } from 'node:child_process';

const BIN = new URL('../../bin/qband.mjs', import.meta.url).pathname;

export interface AgentProcess {
  child: ChildProcess;
  lines: () => Array<Record<string, any>>;
  exit: Promise<number | null>;
}

export function startAgentProcess(
  mapPath: string,
  stateDir: string,
  clientId: string,
  onCleanup: (stop: () => void) => void,
  extraArgs: string[] = [],
  env: Record<string, string> = {},
): AgentProcess {
  // QBAND_TEST_WORKERS=<n>: the agent with n worker threads (test/support/liveRig.ts testWorkers).
  const workers = process.env.QBAND_TEST_WORKERS === undefined ? [] : ['--workers', process.env.QBAND_TEST_WORKERS];
  const child = spawn(process.execPath, [BIN, 'run', '--map', mapPath, '--state-dir', stateDir, '--client-id', clientId, '--no-watch', ...workers, ...extraArgs], {
    env: { ...process.env, ...env },
    stdio: ['ignore', 'ignore', 'pipe'],
  });
  let err = '';
  child.stderr!.on('data', (d) => (err += d));
  const exit = new Promise<number | null>((resolve) => child.on('exit', (code) => resolve(code)));
  onCleanup(() => child.kill('SIGKILL'));
  return {
    child,
    exit,
    lines: () =>
      err
        .split('\n')
        .filter((l) => l.startsWith('{'))
        .map((l) => JSON.parse(l)),
  };
}
