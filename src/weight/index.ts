import type { Normalization, WeightingConfig, WeightingScheme } from '../config/types.js';
import { KindredError } from '../errors.js';
import { dropZeros, dropZerosInPlace } from './block.js';
import { precomputeContextTerms, type ContextTerms } from './context-terms.js';
import { weightLogCount } from './log-count.js';
import { weightObservedExpected } from './observed-expected.js';
import { weightPmi } from './pmi.js';
import { weightPpmi } from './ppmi.js';
import { weightTfidf } from './tfidf.js';
import { weightTtest } from './ttest.js';
import { normalizeRows } from './normalize.js';
import type { Marginals, RowBlock, WeightingFn } from './types.js';

export type { Marginals, RowBlock, WeightingFn } from './types.js';
export { logFn } from './log.js';
export { normalizeRows };
export { computeMarginals } from './marginals.js';
export { precomputeContextTerms, type ContextTerms } from './context-terms.js';
export { dropZeros } from './block.js';

/**
 * A scheme's implementation; the optional precomputed context terms keep per-block cost at O(nnz + rows). `into`:
 * where the values go, counts.values itself to weight in place (each value depends on its own count and the
 * marginals only); a new array when absent.
 */
type WeightingKernel = (counts: RowBlock, m: Marginals, cfg: WeightingConfig, terms?: ContextTerms, into?: Float64Array) => RowBlock;

// One file per scheme, one line per scheme here.
const registry: Record<WeightingScheme, WeightingKernel> = {
  ppmi: weightPpmi,
  pmi: weightPmi,
  'observed-expected': weightObservedExpected,
  ttest: weightTtest,
  'log-count': weightLogCount,
  tfidf: weightTfidf,
};

/** Names of every registered scheme. */
export const weightingSchemes = Object.keys(registry) as WeightingScheme[];

function kernelFor(scheme: WeightingScheme): WeightingKernel {
  const fn = Object.prototype.hasOwnProperty.call(registry, scheme) ? registry[scheme] : undefined;
  if (!fn) {
    throw new KindredError(`weighting.scheme: unknown value ${JSON.stringify(scheme)}; use one of ${weightingSchemes.map((s) => `"${s}"`).join(', ')}`);
  }
  return fn;
}

/**
 * The scheme's weighting function. Its output has exactly the input's entries (sharing indptr and cols),
 * values replaced; entries whose weight is 0 are kept. Use weightBlock for sparse output.
 */
export function getWeighting(scheme: WeightingScheme): WeightingFn {
  return kernelFor(scheme);
}

/**
 * Weights a block of count rows with the configured scheme and drops entries whose weight is exactly 0
 * (clipped PPMI, plain idf of a term in every document), so the output stays sparse.
 * Pass `terms` from precomputeContextTerms to share column quantities explicitly; otherwise they are memoised per marginals.
 */
export function weightBlock(counts: RowBlock, m: Marginals, cfg: WeightingConfig, terms?: ContextTerms): RowBlock {
  return dropZeros(weighted(counts, m, cfg, terms));
}

/** The scheme's weights of every entry of a block (zeros kept), into `into` when given (the kernels' `into`). */
function weighted(counts: RowBlock, m: Marginals, cfg: WeightingConfig, terms?: ContextTerms, into?: Float64Array): RowBlock {
  const needsTerms = cfg.scheme === 'ppmi' || cfg.scheme === 'pmi';
  return kernelFor(cfg.scheme)(counts, m, cfg, needsTerms ? (terms ?? precomputeContextTerms(m, cfg)) : undefined, into);
}

/**
 * weightBlock then normalizeRows, in the block's own arrays, which the caller owns and no longer needs: the same
 * values, and no array allocated per block (fresh memory is slow to touch, docs/performance.md). Returns views of those arrays.
 */
export function weightAndNormalizeInPlace(block: RowBlock, m: Marginals, cfg: WeightingConfig, kind: Normalization, terms?: ContextTerms): RowBlock {
  const sparse = dropZerosInPlace(weighted(block, m, cfg, terms, block.values));
  return normalizeRows(sparse, kind, sparse.values);
}
