import type { WeightingConfig } from '../config/types.js';
import type { ContextTerms } from './context-terms.js';
import { pmiValues } from './pmi.js';
import type { Marginals, RowBlock } from './types.js';

/** PPMI = max(0, log(P(w,c) / (P(w) P_α(c))) − log k) (Bullinaria & Levy 2007; Levy, Goldberg & Dagan 2015). */
export function weightPpmi(counts: RowBlock, m: Marginals, cfg: WeightingConfig, terms?: ContextTerms, into?: Float64Array): RowBlock {
  return pmiValues(counts, m, cfg, true, terms, into);
}
