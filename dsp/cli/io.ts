/** Terminal I/O handed to each command, so commands can be run in tests without a process. */
export interface CliIo {
  out(text: string): void;
  err(text: string): void;
  /** True when stderr is a terminal (progress lines are shown only then). */
  readonly isErrTty: boolean;
}

/**
 * Exit codes of the command line, one per kind of failure (documented in --help).
 * 0 success; 1 unexpected internal error.
 */
export const EXIT = {
  OK: 0,
  INTERNAL: 1,
  USAGE: 2,
  UNREADABLE: 3,
  EMPTY_OR_TRUNCATED: 4,
  BAD_HEADER: 5,
  UNSUPPORTED_ENCODING: 6,
  BAD_SAMPLES: 7,
  TOO_SHORT: 8,
  SILENT: 9,
  BAD_CSV: 10,
  BAD_PARAMETER: 11,
  NO_CONVERGENCE: 12,
  WRITE_FAILED: 13,
  BATCH_FAILED: 14,
} as const;

/** A failure to report as one line on stderr with a distinct exit code (never a stack trace). */
export class CliError extends Error {
  constructor(
    message: string,
    readonly exitCode: number,
  ) {
    super(message);
    this.name = 'CliError';
  }
}

/** The real process I/O. */
export function processIo(): CliIo {
  return {
    out: (t) => void process.stdout.write(t),
    err: (t) => void process.stderr.write(t),
    isErrTty: Boolean(process.stderr.isTTY),
  };
}
