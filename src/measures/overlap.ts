import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/** 1 − Σmin/min(Σu, Σv); a row with no positive mass is at distance 1 from every row. */
function overlapDistance(sumMin: number, sumU: number, sumV: number): number {
  const smaller = sumU < sumV ? sumU : sumV;
  if (smaller === 0) return 1;
  // weighted overlap, Σmin(u,v)/min(Σu, Σv): Curran 2004, "From Distributional to Semantic Similarity"
  const d = 1 - sumMin / smaller;
  return d < 0 ? 0 : d;
}

/** Weighted overlap distance on the rows clipped at zero. */
export const overlap: Measure = {
  name: 'overlap',
  description:
    'weighted overlap distance: 1 - sum_i min(u+_i, v+_i) / min(sum_i u+_i, sum_i v+_i), x+ = max(x, 0)',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'overlap');
    let sumMin = 0, sumU = 0, sumV = 0;
    for (let i = 0; i < u.length; i++) {
      const a = u[i] > 0 ? u[i] : 0, b = v[i] > 0 ? v[i] : 0;
      sumMin += a < b ? a : b;
      sumU += a;
      sumV += b;
    }
    return overlapDistance(sumMin, sumU, sumV);
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'overlap');
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, sumMin = 0, sumU = 0, sumV = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      if (a < 0) a = 0;
      if (b < 0) b = 0;
      sumMin += a < b ? a : b;
      sumU += a;
      sumV += b;
    }
    return overlapDistance(sumMin, sumU, sumV);
  },
};
