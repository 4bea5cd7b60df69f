/**
 * The benches' command lines: `--help` (or `-h`) prints a bench's usage and does no work, and a
 * wrong option says what was wrong and shows the usage (exit 2) instead of a stack trace.
 */
import { parseArgs, type ParseArgsConfig } from 'node:util';

type Options = NonNullable<ParseArgsConfig['options']>;

/** Prints `usage` and exits when the command line asks for help. */
function exitOnHelp(usage: string, argv: readonly string[] = process.argv.slice(2)): void {
  if (argv.includes('--help') || argv.includes('-h')) {
    process.stdout.write(usage);
    process.exit(0);
  }
}

/** `parseArgs` over the bench's options, after `exitOnHelp`; a wrong option ends the bench with exit 2. */
export function benchArgs<O extends Options>(options: O, usage: string, argv: readonly string[] = process.argv.slice(2)) {
  exitOnHelp(usage, argv);
  try {
    return parseArgs({ args: [...argv], options, strict: true, allowPositionals: false }).values;
  } catch (err) {
    process.stderr.write(`${(err as Error).message}\n\n${usage}`);
    process.exit(2);
  }
}

/** A whole number option at least `min`, or exit 2 with the usage. */
export function wholeNumber(value: string | undefined, name: string, min: number, usage: string): number {
  const n = Number(value);
  if (!Number.isInteger(n) || n < min) {
    process.stderr.write(`--${name} takes a whole number of at least ${min}, got '${value}'\n\n${usage}`);
    process.exit(2);
  }
  return n;
}
