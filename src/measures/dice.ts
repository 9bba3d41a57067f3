import { denseSetSums, sparseSetSums, MIN, SUM_U, SUM_V } from './set-sums.js';
import type { Measure, SparseVector } from './types.js';

/** 1 − 2Σmin/Σ(u+v); two rows with no positive mass are at distance 1 (nothing shared). */
function diceDistance(s: Float64Array): number {
  const sumBoth = s[SUM_U] + s[SUM_V];
  if (sumBoth === 0) return 1;
  // weighted Dice, 2Σmin(u,v)/Σ(u+v): Curran 2004, "From Distributional to Semantic Similarity"
  const d = 1 - (2 * s[MIN]) / sumBoth;
  return d < 0 ? 0 : d;
}

/** Weighted Dice distance on the rows clipped at zero. */
export const dice: Measure = {
  name: 'dice',
  description: 'weighted Dice distance: 1 - 2 sum_i min(u+_i, v+_i) / sum_i (u+_i + v+_i), x+ = max(x, 0)',
  dense: (u: Float64Array, v: Float64Array): number => diceDistance(denseSetSums(u, v, 'dice')),
  sparse: (u: SparseVector, v: SparseVector, _dim: number): number => diceDistance(sparseSetSums(u, v, 'dice')),
};
