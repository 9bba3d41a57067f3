import { denseSetSums, sparseSetSums, MIN, SUM_U, SUM_V } from './set-sums.js';
import type { Measure, SparseVector } from './types.js';

/** 1 − Σmin/min(Σu, Σv); a row with no positive mass is at distance 1 from every row. */
function overlapDistance(s: Float64Array): number {
  const smaller = s[SUM_U] < s[SUM_V] ? s[SUM_U] : s[SUM_V];
  if (smaller === 0) return 1;
  // weighted overlap, Σmin(u,v)/min(Σu, Σv): Curran 2004, "From Distributional to Semantic Similarity"
  const d = 1 - s[MIN] / smaller;
  return d < 0 ? 0 : d;
}

/** Weighted overlap distance on the rows clipped at zero. */
export const overlap: Measure = {
  name: 'overlap',
  description:
    'weighted overlap distance: 1 - sum_i min(u+_i, v+_i) / min(sum_i u+_i, sum_i v+_i), x+ = max(x, 0)',
  dense: (u: Float64Array, v: Float64Array): number => overlapDistance(denseSetSums(u, v, 'overlap')),
  sparse: (u: SparseVector, v: SparseVector, _dim: number): number => overlapDistance(sparseSetSums(u, v, 'overlap')),
};
