import type { WeightingConfig } from '../config/types.js';
import { blockRowCount, checkBlockFits, withValues } from './block.js';
import type { Marginals, RowBlock } from './types.js';

/** count(w,c) / E(w,c) with E(w,c) = rowSums[w] · colSums[c] / total (Evert 2005, "The statistics of word cooccurrences"). */
export function weightObservedExpected(counts: RowBlock, m: Marginals, _cfg: WeightingConfig, _terms?: unknown, into?: Float64Array): RowBlock {
  checkBlockFits(counts, m);
  const { indptr, cols, values } = counts;
  const out = into ?? new Float64Array(values.length);
  const nRows = blockRowCount(counts);
  for (let r = 0; r < nRows; r++) {
    const rowSum = m.rowSums[counts.firstRow + r];
    for (let p = indptr[r]; p < indptr[r + 1]; p++) {
      const n = values[p];
      if (n === 0) continue;
      // O/E = O / (R_w C_c / N) (Evert 2005).
      out[p] = n / ((rowSum * m.colSums[cols[p]]) / m.total);
    }
  }
  return withValues(counts, out);
}
