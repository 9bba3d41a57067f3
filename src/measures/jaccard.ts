import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/** 1 − Σmin/Σmax; two rows with no positive mass are at distance 1 (nothing shared). */
function jaccardDistance(sumMin: number, sumMax: number): number {
  if (sumMax === 0) return 1;
  // weighted Jaccard, Σmin(u,v)/Σmax(u,v): Grefenstette 1994, "Explorations in Automatic Thesaurus Discovery"
  const d = 1 - sumMin / sumMax;
  return d < 0 ? 0 : d;
}

/** Weighted Jaccard distance on the rows clipped at zero. */
export const jaccard: Measure = {
  name: 'jaccard',
  description: 'weighted Jaccard distance: 1 - sum_i min(u+_i, v+_i) / sum_i max(u+_i, v+_i), x+ = max(x, 0)',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'jaccard');
    let sumMin = 0, sumMax = 0;
    for (let i = 0; i < u.length; i++) {
      const a = u[i] > 0 ? u[i] : 0, b = v[i] > 0 ? v[i] : 0;
      if (a < b) { sumMin += a; sumMax += b; } else { sumMin += b; sumMax += a; }
    }
    return jaccardDistance(sumMin, sumMax);
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'jaccard');
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, sumMin = 0, sumMax = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      if (a < 0) a = 0;
      if (b < 0) b = 0;
      if (a < b) { sumMin += a; sumMax += b; } else { sumMin += b; sumMax += a; }
    }
    return jaccardDistance(sumMin, sumMax);
  },
};
