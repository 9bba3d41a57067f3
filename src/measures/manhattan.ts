import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/** Manhattan (L1, city block) distance. Negative values are used as they are. */
export const manhattan: Measure = {
  name: 'manhattan',
  description: 'manhattan (L1, city block) distance: sum_i |u_i - v_i|',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'manhattan');
    let sum = 0;
    // L1 distance, Σ|u_i − v_i|: Lee 1999, "Measures of Distributional Similarity"
    for (let i = 0; i < u.length; i++) sum += Math.abs(u[i] - v[i]);
    return sum;
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'manhattan');
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, sum = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      // L1 distance, Σ|u_i − v_i|: Lee 1999, "Measures of Distributional Similarity"
      sum += Math.abs(a - b);
    }
    return sum;
  },
};
