import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/** Euclidean (L2) distance. Negative values are used as they are. */
export const euclidean: Measure = {
  name: 'euclidean',
  description: 'euclidean (L2) distance: sqrt(sum_i (u_i - v_i)^2)',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'euclidean');
    let sum = 0;
    for (let i = 0; i < u.length; i++) {
      // L2 distance, sqrt(Σ(u_i − v_i)²): Lee 1999, "Measures of Distributional Similarity"
      const d = u[i] - v[i];
      sum += d * d;
    }
    return Math.sqrt(sum);
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'euclidean');
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, sum = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      // L2 distance, sqrt(Σ(u_i − v_i)²): Lee 1999, "Measures of Distributional Similarity"
      const d = a - b;
      sum += d * d;
    }
    return Math.sqrt(sum);
  },
};
