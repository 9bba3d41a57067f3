import type { WeightingConfig } from '../config/types.js';
import { checkBlockFits, withValues } from './block.js';
import { logFn } from './log.js';
import type { Marginals, RowBlock } from './types.js';

/** log(1 + count(w,c)) in the configured base (common practice, no source). */
export function weightLogCount(counts: RowBlock, m: Marginals, cfg: WeightingConfig, _terms?: unknown, into?: Float64Array): RowBlock {
  checkBlockFits(counts, m);
  const log = logFn(cfg.logBase);
  const values = counts.values;
  const out = into ?? new Float64Array(values.length);
  // w = log(1 + count) (common practice, no source).
  for (let p = 0; p < values.length; p++) out[p] = log(1 + values[p]);
  return withValues(counts, out);
}
