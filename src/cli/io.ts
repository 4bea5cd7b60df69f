/**
 * What a command needs from the outside world: its output streams and whether a person is
 * watching. Commands take this instead of touching `process` so tests run them in-process.
 */
export interface CliIo {
  stdout: { write(chunk: string): unknown };
  stderr: { write(chunk: string): unknown; isTTY?: boolean };
  /** Working directory that relative paths are resolved against. */
  cwd: string;
  /**
   * Aborted when the reader of stdout has gone away (`qband ... | head -1`): a command stops
   * its work and ends quietly with the exit code it would have had.
   */
  outputClosed?: AbortSignal;
}

/** A sub-command: takes its own arguments (after the command name) and returns the exit code. */
export type Command = (args: string[], io: CliIo) => Promise<number>;

/**
 * Exit codes, one rule for every command (README, every --help):
 * 0 done or valid; 1 an input named on the command line (map, recording, profile, speed series,
 * output file, broker) cannot be read, written or used, or is not valid; 2 the command line
 * itself is wrong, found without opening any file (always tagged QB_E_USAGE).
 */
export const EXIT_OK = 0;
export const EXIT_INVALID = 1;
export const EXIT_USAGE = 2;

/** The sentence every --help ends its options with. */
export const EXIT_CODES_HELP =
  'Exit codes: 0 done (or valid), 1 an input cannot be read, written or used, or is not valid,\n2 the command line is wrong (QB_E_USAGE).';

export function processIo(): CliIo {
  const closed = new AbortController();
  // A reader that goes away makes the next write fail with EPIPE, reported as an 'error'
  // event: without a listener Node prints a trace and dies. Stop the work instead.
  const onError = (err: NodeJS.ErrnoException) => {
    if (!closed.signal.aborted) closed.abort(err);
  };
  process.stdout.on('error', onError);
  process.stderr.on('error', () => {
    // Nowhere left to say anything: stay quiet.
  });
  return { stdout: process.stdout, stderr: process.stderr, cwd: process.cwd(), outputClosed: closed.signal };
}
