import { isKindredError } from '../errors.js';

/** Runs a command action; a user error prints one line and exits 1, a bug keeps its stack trace and exits 70. */
export function runAction<A extends unknown[]>(action: (...args: A) => Promise<void>): (...args: A) => Promise<void> {
  return async (...args: A) => {
    try {
      await action(...args);
    } catch (e) {
      if (isKindredError(e)) {
        process.stderr.write(`kindred: error: ${e.message.replace(/\s*\n\s*/g, ' ')}\n`);
        process.exitCode = 1;
      } else {
        process.stderr.write(`kindred: internal error (please report): ${(e as Error)?.stack ?? String(e)}\n`);
        process.exitCode = 70;
      }
    }
  };
}
