/**
 * Truncated SVD of a sparse matrix by a randomized range finder with power iterations (Halko, Martinsson &
 * Tropp 2011, "Finding structure with randomness: probabilistic algorithms for constructing approximate matrix
 * decompositions", Algorithms 4.4 and 5.1). Memory: two dense row-major sketches, nRows × width and
 * nCols × width (width = rank + oversampling), plus the rank-wide result; the sparse matrix is streamed.
 */
import { jacobiSvd } from './dense.js';
import { orthonormalizeColumns } from './orthonormalize.js';
import { SeededRandom } from './random.js';
import { multiply, multiplyTransposed, projectBothSides, type RowSource } from './sparse-products.js';

export interface TruncatedSvdOptions {
  /** Number of singular triplets wanted, 1 ≤ rank ≤ min(nRows, nCols). */
  rank: number;
  /** Extra sketch columns beyond rank (Halko et al. 2011 §4.2 recommend about 5 to 10). */
  oversampling: number;
  /** Power (subspace) iterations; each costs two more passes over the matrix and sharpens a slowly decaying spectrum. */
  powerIterations: number;
  /** Seed of the Gaussian test matrix: the same seed gives the same result, bit for bit. */
  seed: number;
  /** Called after each pass over the matrix with (passes done, passes in all). */
  onPass?: (done: number, total: number) => void;
}

export interface TruncatedSvd {
  rank: number;
  /** Columns of the sketch (rank + oversampling, at most min(nRows, nCols)). */
  width: number;
  /** The `rank` largest singular values, descending. */
  singularValues: Float64Array;
  /**
   * nRows × rank row-major left singular vectors; column j belongs to singularValues[j]. Each column's sign is
   * fixed so that its entry of largest magnitude (the first one on ties) is positive.
   */
  leftVectors: Float64Array;
  /** Passes over the sparse matrix. */
  passes: number;
}

/** Sketch width for a rank and oversampling on an nRows × nCols matrix. */
export function sketchWidth(nRows: number, nCols: number, rank: number, oversampling: number): number {
  return Math.min(rank + oversampling, nRows, nCols);
}

/** Bytes of the dense working arrays of truncatedSvd (the streamed sparse blocks come on top). */
export function svdWorkingBytes(nRows: number, nCols: number, rank: number, oversampling: number): number {
  const w = sketchWidth(nRows, nCols, rank, oversampling);
  return 8 * (nRows * w + nCols * w + nRows * rank + 8 * w * w);
}

/** Passes over the matrix that truncatedSvd makes. */
export function svdPasses(powerIterations: number): number {
  return 2 * powerIterations + 3;
}

/** Flips the sign of each column so that its entry of largest magnitude (first on ties) is positive. */
function fixSigns(u: Float64Array, nRows: number, rank: number): void {
  for (let j = 0; j < rank; j++) {
    let best = 0;
    for (let i = 0; i < nRows; i++) {
      const v = u[i * rank + j];
      if (Math.abs(v) > Math.abs(best)) best = v;
    }
    if (best < 0) for (let i = 0; i < nRows; i++) u[i * rank + j] = -u[i * rank + j];
  }
}

export function truncatedSvd(a: RowSource, opts: TruncatedSvdOptions): TruncatedSvd {
  const m = a.nRows, n = a.nCols;
  const { rank, oversampling, powerIterations } = opts;
  if (!Number.isInteger(rank) || rank < 1 || rank > Math.min(m, n)) {
    throw new RangeError(`truncatedSvd: rank ${rank} is outside [1, min(${m}, ${n})]`);
  }
  if (!Number.isInteger(oversampling) || oversampling < 0) throw new RangeError(`truncatedSvd: oversampling ${oversampling}`);
  if (!Number.isInteger(powerIterations) || powerIterations < 0) throw new RangeError(`truncatedSvd: powerIterations ${powerIterations}`);
  const w = sketchWidth(m, n, rank, oversampling);
  const total = svdPasses(powerIterations);
  let passes = 0;
  const pass = (): void => {
    passes++;
    opts.onPass?.(passes, total);
  };

  // Stage A, the range finder: Y = A Ω with Gaussian Ω, then q rounds of Q ← orth(A orth(Aᵀ Q)) (Halko et al. 2011, Algorithm 4.4)
  const nSide = new Float64Array(n * w);
  new SeededRandom(opts.seed).fillGaussian(nSide);
  const mSide = new Float64Array(m * w);
  multiply(a, nSide, mSide, w);
  pass();
  orthonormalizeColumns(mSide, m, w);
  for (let it = 0; it < powerIterations; it++) {
    multiplyTransposed(a, mSide, nSide, w);
    pass();
    orthonormalizeColumns(nSide, n, w);
    multiply(a, nSide, mSide, w);
    pass();
    orthonormalizeColumns(mSide, m, w);
  }

  // Stage B: B = Qᵀ A has its rows in the span of P = orth(Aᵀ Q), so B = (Qᵀ A P) Pᵀ exactly and the SVD of the
  // small square M = Qᵀ A P gives B's singular values and, through Q, A's left singular vectors (Halko et al. 2011, Algorithm 5.1)
  multiplyTransposed(a, mSide, nSide, w);
  pass();
  orthonormalizeColumns(nSide, n, w);
  const small = projectBothSides(a, mSide, nSide, w);
  pass();
  const { values, u: um } = jacobiSvd(small, w, w);

  // U = Q · U_M, keeping the first `rank` columns
  const left = new Float64Array(m * rank);
  const row = new Float64Array(rank);
  for (let i = 0; i < m; i++) {
    row.fill(0);
    const qo = i * w;
    for (let s = 0; s < w; s++) {
      const qs = mSide[qo + s];
      if (qs === 0) continue;
      const us = s * w;
      for (let j = 0; j < rank; j++) row[j] += qs * um[us + j];
    }
    left.set(row, i * rank);
  }
  fixSigns(left, m, rank);
  return { rank, width: w, singularValues: values.slice(0, rank), leftVectors: left, passes };
}

/** Term vectors U·Σ^p (eigenvalue weighting exponent p; p = 1 gives U·Σ, p = 0 the bare U), nRows × rank row-major. */
export function weightedLeftVectors(svd: TruncatedSvd, exponent: number): Float64Array {
  const { rank, singularValues, leftVectors } = svd;
  const scale = new Float64Array(rank);
  // 0^0 counts as 1, so p = 0 keeps U as it is
  for (let j = 0; j < rank; j++) scale[j] = exponent === 0 ? 1 : Math.pow(singularValues[j], exponent);
  const out = new Float64Array(leftVectors.length);
  for (let p = 0; p < leftVectors.length; p++) out[p] = leftVectors[p] * scale[p % rank];
  return out;
}
