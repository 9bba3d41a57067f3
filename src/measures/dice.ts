import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/** 1 − 2Σmin/Σ(u+v); two rows with no positive mass are at distance 1 (nothing shared). */
function diceDistance(sumMin: number, sumBoth: number): number {
  if (sumBoth === 0) return 1;
  // weighted Dice, 2Σmin(u,v)/Σ(u+v): Curran 2004, "From Distributional to Semantic Similarity"
  const d = 1 - (2 * sumMin) / sumBoth;
  return d < 0 ? 0 : d;
}

/** Weighted Dice distance on the rows clipped at zero. */
export const dice: Measure = {
  name: 'dice',
  description: 'weighted Dice distance: 1 - 2 sum_i min(u+_i, v+_i) / sum_i (u+_i + v+_i), x+ = max(x, 0)',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'dice');
    let sumMin = 0, sumBoth = 0;
    for (let i = 0; i < u.length; i++) {
      const a = u[i] > 0 ? u[i] : 0, b = v[i] > 0 ? v[i] : 0;
      sumMin += a < b ? a : b;
      sumBoth += a + b;
    }
    return diceDistance(sumMin, sumBoth);
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'dice');
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, sumMin = 0, sumBoth = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      if (a < 0) a = 0;
      if (b < 0) b = 0;
      sumMin += a < b ? a : b;
      sumBoth += a + b;
    }
    return diceDistance(sumMin, sumBoth);
  },
};
