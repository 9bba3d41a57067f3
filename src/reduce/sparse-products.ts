/**
 * Products of a sparse matrix, read block by block in row order, with tall dense row-major matrices.
 * Every product visits the sparse matrix once, so the matrix itself never has to be in memory whole.
 */
import type { RowBlock } from '../weight/types.js';

/** A sparse matrix delivered as row blocks in ascending row order (from shards on disk, or from memory). */
export interface RowSource {
  readonly nRows: number;
  readonly nCols: number;
  /** Calls `visit` once per block, blocks in ascending row order, together covering rows [0, nRows). */
  forEachBlock(visit: (block: RowBlock) => void): void;
}

/** A source over blocks already in memory. */
export function blockSource(blocks: readonly RowBlock[], nRows: number, nCols: number): RowSource {
  return {
    nRows,
    nCols,
    forEachBlock(visit) {
      for (const b of blocks) visit(b);
    },
  };
}

/**
 * out[o … o+width) += Σ_p values[p] · x[cols[p]·width …] over the entries p of one sparse row, four entries per
 * sweep of the output (a quarter of the loads and stores of one entry at a time).
 */
function accumulateRow(cols: Uint32Array, values: Float64Array, start: number, end: number, x: Float64Array, out: Float64Array, o: number, width: number): void {
  let p = start;
  for (; p + 3 < end; p += 4) {
    const v0 = values[p], v1 = values[p + 1], v2 = values[p + 2], v3 = values[p + 3];
    const x0 = cols[p] * width, x1 = cols[p + 1] * width, x2 = cols[p + 2] * width, x3 = cols[p + 3] * width;
    for (let t = 0; t < width; t++) out[o + t] += v0 * x[x0 + t] + v1 * x[x1 + t] + v2 * x[x2 + t] + v3 * x[x3 + t];
  }
  for (; p < end; p++) {
    const v = values[p];
    const xo = cols[p] * width;
    for (let t = 0; t < width; t++) out[o + t] += v * x[xo + t];
  }
}

/** Y = A·X: X is nCols × width, Y is nRows × width, both row-major. Row i of Y depends on row i of A only. */
export function multiply(a: RowSource, x: Float64Array, y: Float64Array, width: number): void {
  y.fill(0);
  a.forEachBlock((b) => {
    const nBlockRows = b.indptr.length - 1;
    for (let r = 0; r < nBlockRows; r++) accumulateRow(b.cols, b.values, b.indptr[r], b.indptr[r + 1], x, y, (b.firstRow + r) * width, width);
  });
}

/** Z = Aᵀ·Q: Q is nRows × width, Z is nCols × width, both row-major. */
export function multiplyTransposed(a: RowSource, q: Float64Array, z: Float64Array, width: number): void {
  z.fill(0);
  a.forEachBlock((b) => {
    const nBlockRows = b.indptr.length - 1;
    for (let r = 0; r < nBlockRows; r++) {
      const qo = (b.firstRow + r) * width;
      for (let p = b.indptr[r]; p < b.indptr[r + 1]; p++) {
        const v = b.values[p];
        const zo = b.cols[p] * width;
        let t = 0;
        for (; t + 3 < width; t += 4) {
          z[zo + t] += v * q[qo + t];
          z[zo + t + 1] += v * q[qo + t + 1];
          z[zo + t + 2] += v * q[qo + t + 2];
          z[zo + t + 3] += v * q[qo + t + 3];
        }
        for (; t < width; t++) z[zo + t] += v * q[qo + t];
      }
    }
  });
}

/** M = Qᵀ·A·P (width × width, row-major) for Q nRows × width and P nCols × width: one pass, one row of A·P at a time. */
export function projectBothSides(a: RowSource, q: Float64Array, pm: Float64Array, width: number): Float64Array {
  const m = new Float64Array(width * width);
  const ap = new Float64Array(width);
  a.forEachBlock((b) => {
    const nBlockRows = b.indptr.length - 1;
    for (let r = 0; r < nBlockRows; r++) {
      if (b.indptr[r] === b.indptr[r + 1]) continue;
      ap.fill(0);
      accumulateRow(b.cols, b.values, b.indptr[r], b.indptr[r + 1], pm, ap, 0, width);
      const qo = (b.firstRow + r) * width;
      for (let s = 0; s < width; s++) {
        const qs = q[qo + s];
        if (qs === 0) continue;
        const ms = s * width;
        for (let t = 0; t < width; t++) m[ms + t] += qs * ap[t];
      }
    }
  });
  return m;
}
