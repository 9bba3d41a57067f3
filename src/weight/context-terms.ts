import type { WeightingConfig } from '../config/types.js';
import { checkWeightingOptions } from './options.js';
import type { Marginals } from './types.js';

/** Column quantities computed once per build (O(nCols)), so weighting a block costs O(nnz + rows). */
export interface ContextTerms {
  /** The smoothing exponent α these terms were computed with. */
  smoothing: number;
  /** P_α(c) = colSums[c]^α / Σ_c' colSums[c']^α; for α = 1 exactly colSums[c] / total. */
  colProb: Float64Array;
}

// Marginals are treated as immutable once built; the cache lets every block reuse one computation.
const cache = new WeakMap<Marginals, Map<number, ContextTerms>>();

/**
 * Smoothed context probabilities for PPMI/PMI (Levy, Goldberg & Dagan 2015, context-distribution smoothing).
 * Memoised per (marginals object, smoothing exponent).
 */
export function precomputeContextTerms(m: Marginals, cfg: WeightingConfig): ContextTerms {
  checkWeightingOptions(cfg);
  let byAlpha = cache.get(m);
  if (!byAlpha) {
    byAlpha = new Map();
    cache.set(m, byAlpha);
  }
  const hit = byAlpha.get(cfg.smoothing);
  if (hit) return hit;
  const alpha = cfg.smoothing;
  const { colSums, nCols } = m;
  const colProb = new Float64Array(nCols);
  if (alpha === 1) {
    // P(c) = colSums[c] / total (Church & Hanks 1990).
    for (let c = 0; c < nCols; c++) colProb[c] = colSums[c] / m.total;
  } else {
    // P_α(c) = colSums[c]^α / Σ colSums^α (Levy, Goldberg & Dagan 2015, §3.2).
    let sum = 0;
    for (let c = 0; c < nCols; c++) {
      const s = colSums[c] > 0 ? Math.pow(colSums[c], alpha) : 0;
      colProb[c] = s;
      sum += s;
    }
    for (let c = 0; c < nCols; c++) colProb[c] /= sum;
  }
  const terms: ContextTerms = { smoothing: alpha, colProb };
  byAlpha.set(alpha, terms);
  return terms;
}
