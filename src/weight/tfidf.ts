import type { WeightingConfig } from '../config/types.js';
import { blockRowCount, checkBlockFits, withValues } from './block.js';
import { logFn } from './log.js';
import type { Marginals, RowBlock } from './types.js';

/**
 * TF-IDF on term × document counts: rows are terms, columns documents, N = nCols, df(t) = rowNnz[t]
 * (Salton & Buckley 1988, "Term-weighting approaches in automatic text retrieval"; Spärck Jones 1972).
 */
export function weightTfidf(counts: RowBlock, m: Marginals, cfg: WeightingConfig, _terms?: unknown, into?: Float64Array): RowBlock {
  checkBlockFits(counts, m);
  const log = logFn(cfg.logBase);
  const logTf = cfg.tf === 'log';
  const smoothIdf = cfg.idf === 'smooth';
  const nDocs = m.nCols;
  const { indptr, values } = counts;
  const out = into ?? new Float64Array(values.length);
  const nRows = blockRowCount(counts);
  for (let r = 0; r < nRows; r++) {
    const df = m.rowNnz[counts.firstRow + r];
    if (df === 0) {
      out.fill(0, indptr[r], indptr[r + 1]);
      continue;
    }
    // idf = log(N / df) (Spärck Jones 1972), or smooth: log((1 + N) / (1 + df)) + 1 (common practice, no source).
    const idf = smoothIdf ? log((1 + nDocs) / (1 + df)) + 1 : log(nDocs / df);
    for (let p = indptr[r]; p < indptr[r + 1]; p++) {
      const n = values[p];
      if (n === 0) continue;
      // tf = count, or 1 + log(count) (Salton & Buckley 1988).
      const tf = logTf ? 1 + log(n) : n;
      out[p] = tf * idf;
    }
  }
  return withValues(counts, out);
}
