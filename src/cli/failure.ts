/**
 * The one way a command reports a failure it cannot go on from: `qband <command>: <message>
 * [<code>]` on stderr, with anything unsafe in the message escaped. A QbandError carries its
 * code; anything else is a defect of qband and says QB_E_INTERNAL, without a stack trace.
 */
import { QbandError, type ErrorCode } from '../errors.ts';
import { printable } from '../text/printable.ts';
import { EXIT_INVALID, EXIT_USAGE, type CliIo } from './io.ts';

/** Longest line of a failure message kept (a message quotes values already cut short). */
const MAX_LINE_CHARS = 2000;

export function failureCode(err: unknown): ErrorCode {
  return err instanceof QbandError ? err.code : 'QB_E_INTERNAL';
}

/** Writes the failure and returns its exit code: 2 for QB_E_USAGE, 1 for everything else. */
export function reportFailure(io: CliIo, command: string, err: unknown): number {
  const code = failureCode(err);
  const message = err instanceof Error ? err.message : String(err);
  io.stderr.write(`qband ${command}: ${safeLines(message)} [${code}]\n`);
  return code === 'QB_E_USAGE' ? EXIT_USAGE : EXIT_INVALID;
}

/** Each line of `text` made printable, newlines kept. */
export function safeLines(text: string): string {
  return text
    .split('\n')
    .map((line) => printable(line, MAX_LINE_CHARS))
    .join('\n');
}
