import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import { positiveMass } from './positive-mass.js';
import type { Measure, SparseVector } from './types.js';

/** The largest Jensen–Shannon distance (disjoint supports), natural log: sqrt(ln 2). */
export const JS_MAX_DISTANCE = Math.sqrt(Math.LN2);

/** One dimension's share of 2·JSD: p ln(p/m) + q ln(q/m), m = (p+q)/2, with 0 ln 0 = 0. */
function jsTerm(p: number, q: number): number {
  const m = (p + q) / 2;
  // JSD = ½ KL(P‖M) + ½ KL(Q‖M): Lin 1991, "Divergence measures based on the Shannon entropy"
  return (p > 0 ? p * Math.log(p / m) : 0) + (q > 0 ? q * Math.log(q / m) : 0);
}

/** sqrt of half the summed terms; rounding can leave a tiny negative sum for near-equal rows. */
function jsDistance(twiceDivergence: number): number {
  // the square root of JSD is a metric: Endres & Schindelin 2003, "A new metric for probability distributions"
  return twiceDivergence > 0 ? Math.sqrt(twiceDivergence / 2) : 0;
}

/**
 * Jensen–Shannon distance: the square root of the JS divergence (natural log) between the rows
 * clipped at zero and scaled to sum 1, as scipy.spatial.distance.jensenshannon. A row with no
 * positive mass is at the maximal distance sqrt(ln 2) from every row, itself included.
 */
export const jensenShannon: Measure = {
  name: 'js',
  description:
    'Jensen-Shannon distance sqrt(JSD(P_u, P_v)), JSD = 1/2 KL(P||M) + 1/2 KL(Q||M), M = (P+Q)/2, ' +
    'P = max(u,0)/sum max(u,0), natural log',

  dense(u: Float64Array, v: Float64Array): number {
    checkDense(u, v, 'js');
    const su = positiveMass(u), sv = positiveMass(v);
    if (su === 0 || sv === 0) return JS_MAX_DISTANCE;
    let sum = 0;
    for (let i = 0; i < u.length; i++) {
      sum += jsTerm(u[i] > 0 ? u[i] / su : 0, v[i] > 0 ? v[i] / sv : 0);
    }
    return jsDistance(sum);
  },

  sparse(u: SparseVector, v: SparseVector, _dim: number): number {
    checkSparse(u, v, 'js');
    const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
    const su = positiveMass(uv), sv = positiveMass(vv);
    if (su === 0 || sv === 0) return JS_MAX_DISTANCE;
    const nu = ui.length, nv = vi.length;
    let i = 0, j = 0, sum = 0;
    while (i < nu || j < nv) {
      const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
      const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
      let a = 0, b = 0;
      if (ci <= cj) a = uv[i++];
      if (cj <= ci) b = vv[j++];
      sum += jsTerm(a > 0 ? a / su : 0, b > 0 ? b / sv : 0);
    }
    return jsDistance(sum);
  },
};
