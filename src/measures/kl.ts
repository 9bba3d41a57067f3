import { checkDense, checkSparse, PAST_LAST_INDEX } from './checks.js';
import { positiveMass } from './positive-mass.js';
import type { Measure, SparseVector } from './types.js';

/** Additive smoothing mass per dimension, added after each row is scaled to sum 1. */
export const KL_SMOOTHING_EPSILON = 1e-9;

/**
 * Kullback–Leibler divergence KL(P_u ‖ P_v), natural log, between smoothed distributions:
 * P_u,i = (u⁺_i / Σu⁺ + ε) / (1 + dim·ε), with u⁺ = max(u, 0); a row with no positive mass
 * becomes the uniform distribution 1/dim. Finite for every input; asymmetric.
 */
export function makeKullbackLeibler(epsilon: number = KL_SMOOTHING_EPSILON): Measure {
  if (!(epsilon > 0) || !Number.isFinite(epsilon)) {
    throw new RangeError(`kl: smoothing epsilon must be a positive finite number, got ${epsilon}`);
  }
  const eps = epsilon;
  return {
    name: 'kl',
    description:
      `Kullback-Leibler divergence KL(P_u || P_v) = sum_i P_u,i ln(P_u,i / P_v,i), ` +
      `P_x,i = (max(x_i,0)/sum max(x,0) + ${eps}) / (1 + dim*${eps})`,

    dense(u: Float64Array, v: Float64Array): number {
      checkDense(u, v, 'kl');
      const dim = u.length;
      if (dim === 0) return 0;
      const su = positiveMass(u), sv = positiveMass(v);
      // additive smoothing over all dim dimensions, then renormalise (see docs/measures.md)
      const zu = (su > 0 ? 1 : 0) + dim * eps;
      const zv = (sv > 0 ? 1 : 0) + dim * eps;
      let sum = 0;
      for (let i = 0; i < dim; i++) {
        const a = u[i] > 0 ? u[i] / su : 0;
        const b = v[i] > 0 ? v[i] / sv : 0;
        const p = (a + eps) / zu, q = (b + eps) / zv;
        // Σ p ln(p/q): Kullback & Leibler 1951, "On Information and Sufficiency"
        sum += p * Math.log(p / q);
      }
      return sum > 0 ? sum : 0;
    },

    sparse(u: SparseVector, v: SparseVector, dim: number): number {
      checkSparse(u, v, 'kl');
      if (dim === 0) return 0;
      const ui = u.indices, uv = u.values, vi = v.indices, vv = v.values;
      const nu = ui.length, nv = vi.length;
      const su = positiveMass(uv), sv = positiveMass(vv);
      const zu = (su > 0 ? 1 : 0) + dim * eps;
      const zv = (sv > 0 ? 1 : 0) + dim * eps;
      let i = 0, j = 0, visited = 0, sum = 0;
      while (i < nu || j < nv) {
        const ci = i < nu ? ui[i] : PAST_LAST_INDEX;
        const cj = j < nv ? vi[j] : PAST_LAST_INDEX;
        let a = 0, b = 0;
        if (ci <= cj) a = uv[i++];
        if (cj <= ci) b = vv[j++];
        const p = ((a > 0 ? a / su : 0) + eps) / zu;
        const q = ((b > 0 ? b / sv : 0) + eps) / zv;
        // Σ p ln(p/q): Kullback & Leibler 1951, "On Information and Sufficiency"
        sum += p * Math.log(p / q);
        visited++;
      }
      // the dim − visited dimensions where both rows are zero hold only the smoothing mass
      const p0 = eps / zu, q0 = eps / zv;
      sum += (dim - visited) * p0 * Math.log(p0 / q0);
      return sum > 0 ? sum : 0;
    },
  };
}

export const kullbackLeibler: Measure = makeKullbackLeibler();
