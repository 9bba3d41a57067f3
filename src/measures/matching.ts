import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/**
 * Simple matching distance on the presence pattern (x_i > 0): the fraction of the dim dimensions
 * where exactly one row is present; 0 when dim is 0.
 */
export const matching: Measure = {
  name: 'matching',
  description: 'simple matching distance: |{i : (u_i > 0) != (v_i > 0)}| / dim (Hamming distance on presence)',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'matching');
    const dim = u.length;
    if (dim === 0) return 0;
    let differ = 0;
    for (let i = 0; i < dim; i++) if (u[i] > 0 !== v[i] > 0) differ++;
    // 1 − (a + d)/n: Sokal & Michener 1958, "A statistical method for evaluating systematic relationships"
    return differ / dim;
  },

  sparse(u: SparseVector, v: SparseVector, dim: number): number {
    checkSparse(u, v, 'matching');
    if (dim === 0) return 0;
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, differ = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      if (a > 0 !== b > 0) differ++;
    }
    // dimensions absent from both rows agree, so only the union is walked
    // 1 − (a + d)/n: Sokal & Michener 1958, "A statistical method for evaluating systematic relationships"
    return differ / dim;
  },
};
