/**
 * The one way a command refuses its command line: what is wrong, the synopsis, and where the
 * full help is. Exit code 2 (EXIT_USAGE) for every command.
 */
import { EXIT_USAGE, type CliIo } from './io.ts';

export function usageError(io: CliIo, command: string, message: string, synopsis: string): number {
  io.stderr.write(`qband ${command}: ${message} [QB_E_USAGE]\nUsage: ${synopsis}; see qband ${command} --help\n`);
  return EXIT_USAGE;
}
