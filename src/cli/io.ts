/**
 * What a command needs from the outside world: its output streams and whether a person is
 * watching. Commands take this instead of touching `process` so tests can run them in-process.
 */
export interface CliIo {
  stdout: { write(chunk: string): unknown };
  stderr: { write(chunk: string): unknown; isTTY?: boolean };
  /** Working directory that relative paths are resolved against. */
  cwd: string;
}

/** A sub-command: takes its own arguments (after the command name) and returns the exit code. */
export type Command = (args: string[], io: CliIo) => Promise<number>;

/** Exit codes shared by every command. */
export const EXIT_OK = 0;
/** The input was read but is not valid (or the run found a problem it must report). */
export const EXIT_INVALID = 1;
/** The command line itself is wrong. */
export const EXIT_USAGE = 2;

export function processIo(): CliIo {
  return { stdout: process.stdout, stderr: process.stderr, cwd: process.cwd() };
}
