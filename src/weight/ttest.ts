import type { WeightingConfig } from '../config/types.js';
import { blockRowCount, checkBlockFits, withValues } from './block.js';
import type { Marginals, RowBlock } from './types.js';

/** Signed t-test weight on observed pairs, (P(w,c) − P(w)P(c)) / sqrt(P(w)P(c)) (Curran & Moens 2002). */
export function weightTtest(counts: RowBlock, m: Marginals, _cfg: WeightingConfig, _terms?: unknown, into?: Float64Array): RowBlock {
  checkBlockFits(counts, m);
  const { indptr, cols, values } = counts;
  const total = m.total;
  const out = into ?? new Float64Array(values.length);
  const nRows = blockRowCount(counts);
  for (let r = 0; r < nRows; r++) {
    const pw = m.rowSums[counts.firstRow + r] / total;
    for (let p = indptr[r]; p < indptr[r + 1]; p++) {
      const n = values[p];
      if (n === 0) continue;
      const expected = pw * (m.colSums[cols[p]] / total);
      // t = (P(w,c) − P(w)P(c)) / sqrt(P(w)P(c)) (Curran & Moens 2002, "Improvements in automatic thesaurus extraction").
      out[p] = (n / total - expected) / Math.sqrt(expected);
    }
  }
  return withValues(counts, out);
}
