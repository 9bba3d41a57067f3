/**
 * The sums the set-based measures (jaccard, dice, overlap) are made of, over rows clipped at zero:
 * Σ min(u+, v+), Σ u+, Σ v+ (Σ max = Σu+ + Σv+ − Σmin). One pass, written into a reused scratch array.
 */
import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import type { SparseVector } from './types.js';

export const MIN = 0;
export const SUM_U = 1;
export const SUM_V = 2;

const scratch = new Float64Array(3);

export function denseSetSums(u: Float64Array, v: Float64Array, measure: string): Float64Array {
  checkDense(u, v, measure);
  let sumMin = 0, sumU = 0, sumV = 0;
  for (let i = 0; i < u.length; i++) {
    const a = u[i] > 0 ? u[i] : 0, b = v[i] > 0 ? v[i] : 0;
    sumMin += a < b ? a : b;
    sumU += a;
    sumV += b;
  }
  scratch[MIN] = sumMin;
  scratch[SUM_U] = sumU;
  scratch[SUM_V] = sumV;
  return scratch;
}

export function sparseSetSums(u: SparseVector, v: SparseVector, measure: string): Float64Array {
  checkSparse(u, v, measure);
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
  scratch[MIN] = sumMin;
  scratch[SUM_U] = sumU;
  scratch[SUM_V] = sumV;
  return scratch;
}
