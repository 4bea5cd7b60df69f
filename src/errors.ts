/**
 * The one registry of qband's coded errors and drop reasons.
 *
 * Every code has a meaning and a fix; docs/errors.md carries the same table and a test keeps the
 * two in step. A retired code stays here marked `retired: true` and is never reused.
 */
export interface ErrorCodeInfo {
  meaning: string;
  fix: string;
  retired?: boolean;
}

export const ERROR_CODES = {
  QB_E_USAGE: {
    meaning: 'The command line is not understood (unknown option, missing argument).',
    fix: 'Run `qband <command> --help` and correct the call.',
  },
  QB_E_FILE_READ: {
    meaning: 'A file named on the command line or in the map cannot be read.',
    fix: 'Check the path and permissions.',
  },
  QB_E_FFT_SIZE: {
    meaning: 'An FFT frame size is not a power of two between 32 and 4194304.',
    fix: 'Set analysis frame_size to a power of two such as 4096, 8192 or 16384.',
  },
  QB_E_FFT_LOAD: {
    meaning: 'The WebAssembly FFT module could not be loaded (neither its SIMD nor its plain build).',
    fix: 'Reinstall dependencies (`npm ci`) and check that Node is version 20 or later.',
  },
  QB_E_DSP_ARGUMENT: {
    meaning: 'A signal-processing step was given a value outside its range (overlap, averages, decimation, sample rate, buffer length, zone boundaries).',
    fix: 'Correct the value the message quotes; the message says what range was expected.',
  },
} as const satisfies Record<string, ErrorCodeInfo>;

export type ErrorCode = keyof typeof ERROR_CODES;

/** An error a person can act on: a code from the registry and a message quoting the bad value. */
export class QbandError extends Error {
  readonly code: ErrorCode;
  constructor(code: ErrorCode, message: string, options?: { cause?: unknown }) {
    super(message, options);
    this.name = 'QbandError';
    this.code = code;
  }
}
