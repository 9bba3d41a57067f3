/**
 * An error the user can cause and fix (bad config, bad input, missing file, full disk).
 * The command line prints its message on one line and exits non-zero without a stack trace.
 * Anything else is a bug and keeps its stack trace.
 */
export class KindredError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'KindredError';
  }
}

export function isKindredError(e: unknown): e is KindredError {
  return e instanceof KindredError;
}
