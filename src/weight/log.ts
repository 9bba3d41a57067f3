import type { LogBase } from '../config/types.js';
import { KindredError } from '../errors.js';

/** The logarithm in the configured base (`weighting.logBase`). */
export function logFn(base: LogBase): (x: number) => number {
  switch (base) {
    case '2':
      return Math.log2;
    case 'e':
      return Math.log;
    case '10':
      return Math.log10;
    default:
      throw new KindredError(`weighting.logBase: unknown value ${JSON.stringify(base)}; use one of "2", "e", "10"`);
  }
}
