import { denseSetSums, sparseSetSums, MIN, SUM_U, SUM_V } from './set-sums.js';
import type { Measure, SparseVector } from './types.js';

/** 1 − Σmin/Σmax; two rows with no positive mass are at distance 1 (nothing shared). */
function jaccardDistance(s: Float64Array): number {
  const sumMax = s[SUM_U] + s[SUM_V] - s[MIN];
  if (sumMax === 0) return 1;
  // weighted Jaccard, Σmin(u,v)/Σmax(u,v): Grefenstette 1994, "Explorations in Automatic Thesaurus Discovery"
  const d = 1 - s[MIN] / sumMax;
  return d < 0 ? 0 : d;
}

/** Weighted Jaccard distance on the rows clipped at zero. */
export const jaccard: Measure = {
  name: 'jaccard',
  description: 'weighted Jaccard distance: 1 - sum_i min(u+_i, v+_i) / sum_i max(u+_i, v+_i), x+ = max(x, 0)',
  dense: (u: Float64Array, v: Float64Array): number => jaccardDistance(denseSetSums(u, v, 'jaccard')),
  sparse: (u: SparseVector, v: SparseVector, _dim: number): number => jaccardDistance(sparseSetSums(u, v, 'jaccard')),
};
