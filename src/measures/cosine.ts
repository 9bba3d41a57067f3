import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { Measure, SparseVector } from './types.js';

/** Cosine distance from the three sums; a zero vector is at distance 1 from everything, itself included. */
function cosineDistance(dot: number, uu: number, vv: number): number {
  if (uu === 0 || vv === 0) return 1;
  // 1 − u·v / (‖u‖ ‖v‖): Salton & McGill 1983, "Introduction to Modern Information Retrieval"
  const d = 1 - dot / (Math.sqrt(uu) * Math.sqrt(vv));
  // rounding can step just outside [0, 2]
  return d < 0 ? 0 : d > 2 ? 2 : d;
}

/** Cosine distance, 1 − cosine similarity, in [0, 2]. Negative values are used as they are. */
export const cosine: Measure = {
  name: 'cosine',
  description: 'cosine distance: 1 - sum_i u_i v_i / (||u||_2 ||v||_2); 1 if either vector is zero',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'cosine');
    let dot = 0, uu = 0, vv = 0;
    for (let i = 0; i < u.length; i++) {
      const a = u[i], b = v[i];
      dot += a * b;
      uu += a * a;
      vv += b * b;
    }
    return cosineDistance(dot, uu, vv);
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'cosine');
    const ui = u.indices, uv = u.values, vi = v.indices, vv_ = v.values;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, dot = 0, uu = 0, vv = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv_[j++];
      dot += a * b;
      uu += a * a;
      vv += b * b;
    }
    return cosineDistance(dot, uu, vv);
  },
};
