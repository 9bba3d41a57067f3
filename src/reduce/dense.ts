/**
 * Small dense linear algebra for the truncated SVD: a symmetric eigensolver and a singular value decomposition,
 * both by Jacobi rotations, on row-major Float64Arrays of a few hundred rows at most.
 */

/** Sweeps after which a Jacobi iteration is declared stuck (a bug: both converge in well under 30 sweeps). */
const MAX_SWEEPS = 60;

export interface SymmetricEigen {
  /** Eigenvalues, descending. */
  values: Float64Array;
  /** n×n row-major; column j (entries vectors[i·n + j]) is the unit eigenvector of values[j]. */
  vectors: Float64Array;
}

/**
 * Eigenvalues and eigenvectors of the symmetric n×n matrix `a` (row-major; only read, never changed)
 * by the cyclic Jacobi method (Golub & Van Loan 2013, "Matrix Computations", 4th ed., §8.5).
 */
export function symmetricEigen(a: Float64Array, n: number): SymmetricEigen {
  if (a.length !== n * n) throw new RangeError(`symmetricEigen: ${a.length} entries for a ${n}×${n} matrix`);
  const w = Float64Array.from(a);
  const v = new Float64Array(n * n);
  for (let i = 0; i < n; i++) v[i * n + i] = 1;
  let scale = 0;
  for (let i = 0; i < n * n; i++) scale += w[i] * w[i];
  for (let sweep = 0; ; sweep++) {
    let off = 0;
    for (let p = 0; p < n; p++) for (let q = p + 1; q < n; q++) off += w[p * n + q] * w[p * n + q];
    // converged once the off-diagonal mass is at rounding level of the whole matrix
    if (off <= 1e-30 * scale || off === 0) break;
    if (sweep === MAX_SWEEPS) throw new Error(`symmetricEigen: no convergence after ${MAX_SWEEPS} sweeps (off-diagonal ${off})`);
    for (let p = 0; p < n - 1; p++) {
      for (let q = p + 1; q < n; q++) {
        const apq = w[p * n + q];
        if (apq === 0) continue;
        const app = w[p * n + p], aqq = w[q * n + q];
        // rotation zeroing a_pq, the smaller angle: Golub & Van Loan 2013, Algorithm 8.5.1 (sym.schur2)
        const theta = (aqq - app) / (2 * apq);
        const t = (theta >= 0 ? 1 : -1) / (Math.abs(theta) + Math.sqrt(theta * theta + 1));
        const c = 1 / Math.sqrt(t * t + 1);
        const s = t * c;
        for (let k = 0; k < n; k++) {
          const akp = w[k * n + p], akq = w[k * n + q];
          w[k * n + p] = c * akp - s * akq;
          w[k * n + q] = s * akp + c * akq;
        }
        for (let k = 0; k < n; k++) {
          const apk = w[p * n + k], aqk = w[q * n + k];
          w[p * n + k] = c * apk - s * aqk;
          w[q * n + k] = s * apk + c * aqk;
        }
        w[p * n + q] = 0;
        w[q * n + p] = 0;
        for (let k = 0; k < n; k++) {
          const vkp = v[k * n + p], vkq = v[k * n + q];
          v[k * n + p] = c * vkp - s * vkq;
          v[k * n + q] = s * vkp + c * vkq;
        }
      }
    }
  }
  const order = Array.from({ length: n }, (_, i) => i).sort((x, y) => w[y * n + y] - w[x * n + x] || x - y);
  const values = new Float64Array(n);
  const vectors = new Float64Array(n * n);
  for (let j = 0; j < n; j++) {
    const src = order[j];
    values[j] = w[src * n + src];
    for (let i = 0; i < n; i++) vectors[i * n + j] = v[i * n + src];
  }
  return { values, vectors };
}

export interface DenseSvd {
  /** Singular values, descending. */
  values: Float64Array;
  /**
   * rows×cols row-major left singular vectors: column j (entries u[i·cols + j]) belongs to values[j];
   * a column whose singular value is 0 is all zeros.
   */
  u: Float64Array;
}

/**
 * Singular values and left singular vectors of the rows×cols matrix `a` (row-major, rows ≥ cols; not changed)
 * by one-sided Jacobi rotations on its columns (Hestenes 1958, "Inversion of matrices by biorthogonalization";
 * Demmel & Veselić 1992, "Jacobi's method is more accurate than QR"): accurate to rounding relative to each
 * singular value's own size, not only to the largest.
 */
export function jacobiSvd(a: Float64Array, rows: number, cols: number): DenseSvd {
  if (a.length !== rows * cols) throw new RangeError(`jacobiSvd: ${a.length} entries for a ${rows}×${cols} matrix`);
  if (rows < cols) throw new RangeError(`jacobiSvd: needs rows >= cols, got ${rows}×${cols}`);
  // column-major working copy: each column contiguous
  const m = new Float64Array(rows * cols);
  for (let i = 0; i < rows; i++) for (let j = 0; j < cols; j++) m[j * rows + i] = a[i * cols + j];
  const norms = new Float64Array(cols);
  const eps = 2.220446049250313e-16;
  for (let sweep = 0; ; sweep++) {
    let rotated = false;
    for (let j = 0; j < cols; j++) {
      let s = 0;
      const base = j * rows;
      for (let i = 0; i < rows; i++) s += m[base + i] * m[base + i];
      norms[j] = s;
    }
    for (let p = 0; p < cols - 1; p++) {
      const bp = p * rows;
      for (let q = p + 1; q < cols; q++) {
        const bq = q * rows;
        let gamma = 0;
        for (let i = 0; i < rows; i++) gamma += m[bp + i] * m[bq + i];
        const alpha = norms[p], beta = norms[q];
        // columns p, q count as orthogonal once their cosine is at rounding level (Demmel & Veselić 1992)
        if (gamma === 0 || Math.abs(gamma) <= rows * eps * Math.sqrt(alpha * beta)) continue;
        rotated = true;
        const zeta = (beta - alpha) / (2 * gamma);
        const t = (zeta >= 0 ? 1 : -1) / (Math.abs(zeta) + Math.sqrt(1 + zeta * zeta));
        const c = 1 / Math.sqrt(1 + t * t);
        const s = c * t;
        for (let i = 0; i < rows; i++) {
          const x = m[bp + i], y = m[bq + i];
          m[bp + i] = c * x - s * y;
          m[bq + i] = s * x + c * y;
        }
        // the rotation changes the two squared norms by ∓ t·γ (Hestenes 1958)
        norms[p] = alpha - t * gamma;
        norms[q] = beta + t * gamma;
      }
    }
    if (!rotated) break;
    if (sweep === MAX_SWEEPS) throw new Error(`jacobiSvd: no convergence after ${MAX_SWEEPS} sweeps`);
  }
  const sigma = new Float64Array(cols);
  for (let j = 0; j < cols; j++) {
    let s = 0;
    for (let i = 0; i < rows; i++) s += m[j * rows + i] * m[j * rows + i];
    sigma[j] = Math.sqrt(s);
  }
  const order = Array.from({ length: cols }, (_, i) => i).sort((x, y) => sigma[y] - sigma[x] || x - y);
  const values = new Float64Array(cols);
  const u = new Float64Array(rows * cols);
  for (let j = 0; j < cols; j++) {
    const src = order[j];
    values[j] = sigma[src];
    if (sigma[src] === 0) continue;
    const inv = 1 / sigma[src];
    for (let i = 0; i < rows; i++) u[i * cols + j] = m[src * rows + i] * inv;
  }
  return { values, u };
}
