import type { WeightingConfig } from '../config/types.js';
import { blockRowCount, checkBlockFits, withValues } from './block.js';
import { precomputeContextTerms, type ContextTerms } from './context-terms.js';
import { logFn } from './log.js';
import { checkWeightingOptions } from './options.js';
import type { Marginals, RowBlock } from './types.js';

/**
 * Shifted PMI of every stored pair, optionally clipped at zero; shared by the PMI and PPMI schemes.
 * Pairs with count 0 are unobserved: their value is 0 (they are dropped later), not −∞.
 */
/**
 * `into`: where the values go (counts.values itself, to weight in place: each value depends on its own count only);
 * a new array when absent.
 */
export function pmiValues(counts: RowBlock, m: Marginals, cfg: WeightingConfig, clip: boolean, terms?: ContextTerms, into?: Float64Array): RowBlock {
  checkBlockFits(counts, m);
  checkWeightingOptions(cfg);
  const t = terms ?? precomputeContextTerms(m, cfg);
  if (t.smoothing !== cfg.smoothing) throw new Error(`context terms computed for smoothing ${t.smoothing}, used with ${cfg.smoothing}`);
  const log = logFn(cfg.logBase);
  const colProb = t.colProb;
  const { indptr, cols, values } = counts;
  const total = m.total;
  // Shifted PMI subtracts log k (Levy & Goldberg 2014, "Neural word embedding as implicit matrix factorization").
  const logShift = log(cfg.shift);
  const out = into ?? new Float64Array(values.length);
  const nRows = blockRowCount(counts);
  for (let r = 0; r < nRows; r++) {
    const pw = m.rowSums[counts.firstRow + r] / total;
    for (let p = indptr[r]; p < indptr[r + 1]; p++) {
      const n = values[p];
      if (n === 0) continue;
      // PMI = log(P(w,c) / (P(w) P_α(c))) (Church & Hanks 1990; Levy, Goldberg & Dagan 2015 for P_α).
      const v = log(n / total / (pw * colProb[cols[p]])) - logShift;
      // PPMI = max(0, PMI) (Bullinaria & Levy 2007).
      out[p] = clip && v < 0 ? 0 : v;
    }
  }
  return withValues(counts, out);
}

/** PMI on observed pairs, with the same context smoothing and shift as PPMI; unobserved pairs stay absent. */
export function weightPmi(counts: RowBlock, m: Marginals, cfg: WeightingConfig, terms?: ContextTerms, into?: Float64Array): RowBlock {
  return pmiValues(counts, m, cfg, false, terms, into);
}
