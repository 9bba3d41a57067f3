/**
 * Orthonormal columns for a tall row-major matrix (rows × width, width small), in place, by the eigenvalue
 * decomposition of the Gram matrix, done twice: SVQB (Stathopoulos & Wu 2002, "A block orthogonalization
 * procedure with constant synchronization requirements"). Row-major suits the sparse products, which read and
 * write whole rows; SVQB touches the tall matrix only in two streaming passes per round.
 */
import { symmetricEigen } from './dense.js';

/** Unit roundoff of float64. */
const EPS = 2.220446049250313e-16;

/** G = Yᵀ Y (width × width, full symmetric), four rows at a time so G is read once per four rows. */
export function gramMatrix(y: Float64Array, nRows: number, width: number): Float64Array {
  const g = new Float64Array(width * width);
  let i = 0;
  for (; i + 4 <= nRows; i += 4) {
    const o0 = i * width, o1 = o0 + width, o2 = o1 + width, o3 = o2 + width;
    for (let s = 0; s < width; s++) {
      const a0 = y[o0 + s], a1 = y[o1 + s], a2 = y[o2 + s], a3 = y[o3 + s];
      if (a0 === 0 && a1 === 0 && a2 === 0 && a3 === 0) continue;
      const gs = s * width;
      for (let t = s; t < width; t++) g[gs + t] += a0 * y[o0 + t] + a1 * y[o1 + t] + a2 * y[o2 + t] + a3 * y[o3 + t];
    }
  }
  for (; i < nRows; i++) {
    const o = i * width;
    for (let s = 0; s < width; s++) {
      const a = y[o + s];
      if (a === 0) continue;
      const gs = s * width;
      for (let t = s; t < width; t++) g[gs + t] += a * y[o + t];
    }
  }
  for (let s = 0; s < width; s++) for (let t = s + 1; t < width; t++) g[t * width + s] = g[s * width + t];
  return g;
}

/** Y ← Y·T for a width × width row-major T, one row at a time. */
export function multiplyRowsInPlace(y: Float64Array, nRows: number, width: number, t: Float64Array): void {
  const row = new Float64Array(width);
  for (let i = 0; i < nRows; i++) {
    const o = i * width;
    row.fill(0);
    for (let s = 0; s < width; s++) {
      const a = y[o + s];
      if (a === 0) continue;
      const ts = s * width;
      for (let c = 0; c < width; c++) row[c] += a * t[ts + c];
    }
    y.set(row, o);
  }
}

/** One SVQB round; returns how many directions were kept. */
function svqbRound(y: Float64Array, nRows: number, width: number): number {
  const g = gramMatrix(y, nRows, width);
  // scale to unit diagonal first, so the eigensolver sees the columns' angles, not their lengths (Stathopoulos & Wu 2002)
  const d = new Float64Array(width);
  for (let j = 0; j < width; j++) d[j] = g[j * width + j] > 0 ? 1 / Math.sqrt(g[j * width + j]) : 0;
  for (let s = 0; s < width; s++) for (let c = 0; c < width; c++) g[s * width + c] *= d[s] * d[c];
  const { values, vectors } = symmetricEigen(g, width);
  const largest = values[0];
  // a direction whose scaled Gram eigenvalue is at rounding level (width·ε of the largest) carries no information: drop it
  const floor = width * EPS * largest;
  // T = D W Λ^(-1/2), so that (Y T)ᵀ (Y T) = I on the kept directions
  const t = new Float64Array(width * width);
  let kept = 0;
  for (let j = 0; j < width; j++) {
    if (!(largest > 0) || !(values[j] > floor)) continue;
    kept++;
    const inv = 1 / Math.sqrt(values[j]);
    for (let s = 0; s < width; s++) t[s * width + j] = d[s] * vectors[s * width + j] * inv;
  }
  multiplyRowsInPlace(y, nRows, width, t);
  return kept;
}

/**
 * Makes the columns of the rows × width row-major `y` orthonormal in place, spanning (to rounding) the same space.
 * Two rounds: the second repairs the orthogonality the first loses to rounding ("twice is enough").
 * Directions that are numerically dependent become zero columns. Returns the number of nonzero columns.
 */
export function orthonormalizeColumns(y: Float64Array, nRows: number, width: number): number {
  if (y.length !== nRows * width) throw new RangeError(`orthonormalizeColumns: ${y.length} entries for ${nRows}×${width}`);
  svqbRound(y, nRows, width);
  return svqbRound(y, nRows, width);
}
