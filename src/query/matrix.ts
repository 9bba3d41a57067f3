/**
 * Whole matrices in memory for neighbour search: the weighted rows in compressed sparse row form with their
 * transpose (an inverted index from context to rows), or dense term vectors. Arrays can live in
 * SharedArrayBuffers so worker threads read them without copies.
 */
import path from 'node:path';
import type { SparseVector } from '../measures/index.js';
import { readShard } from '../store/shards.js';

/** Compressed sparse rows: row i is cols/values[indptr[i] … indptr[i+1]), columns ascending. */
export interface CsrMatrix {
  nRows: number;
  nCols: number;
  indptr: Uint32Array;
  cols: Uint32Array;
  values: Float64Array;
}

/** Compressed sparse columns (the transpose): column c lists its rows ascending in rows/values[indptr[c] … indptr[c+1]). */
export interface CscMatrix {
  nRows: number;
  nCols: number;
  indptr: Uint32Array;
  rows: Uint32Array;
  values: Float64Array;
}

/** Dense row-major matrix: row i is data[i·dim … (i+1)·dim). */
export interface DenseMatrix {
  nRows: number;
  dim: number;
  data: Float64Array;
}

type TypedCtor<T> = { new (buffer: ArrayBufferLike, byteOffset?: number, length?: number): T; BYTES_PER_ELEMENT: number };

/** A zeroed typed array, in a SharedArrayBuffer when `shared`. */
export function allocate<T>(ctor: TypedCtor<T> & { new (length: number): T }, length: number, shared: boolean): T {
  if (!shared) return new ctor(length);
  return new ctor(new SharedArrayBuffer(Math.max(1, length) * ctor.BYTES_PER_ELEMENT), 0, length);
}

/** Row i as a SparseVector (views, no copy). */
export function csrRow(m: CsrMatrix, i: number): SparseVector {
  const a = m.indptr[i], b = m.indptr[i + 1];
  return { indices: m.cols.subarray(a, b), values: m.values.subarray(a, b) };
}

/** Row i of a dense matrix (a view). */
export function denseRow(m: DenseMatrix, i: number): Float64Array {
  return m.data.subarray(i * m.dim, (i + 1) * m.dim);
}

/** A weighted shard with its row range. */
export interface WeightedPart {
  file: string;
  firstRow: number;
  endRow: number;
}

/** Reads weighted shards (files relative to `dir`, or absolute) into one CSR matrix. */
export function readWeightedMatrix(dir: string, parts: readonly WeightedPart[], nRows: number, nCols: number, shared = false): CsrMatrix {
  const blocks = parts.map((p) => readShard(path.resolve(dir, p.file), p.firstRow, p.endRow));
  let nnz = 0;
  for (const b of blocks) nnz += b.values.length;
  const indptr = allocate(Uint32Array, nRows + 1, shared);
  const cols = allocate(Uint32Array, nnz, shared);
  const values = allocate(Float64Array, nnz, shared);
  let q = 0;
  for (const b of blocks) {
    const n = b.indptr.length - 1;
    for (let r = 0; r < n; r++) indptr[b.firstRow + r + 1] = b.indptr[r + 1] - b.indptr[r];
    cols.set(b.cols, q);
    values.set(b.values, q);
    q += b.values.length;
  }
  for (let r = 0; r < nRows; r++) indptr[r + 1] += indptr[r];
  if (indptr[nRows] !== nnz) throw new Error(`weighted shards: row ranges do not cover rows [0, ${nRows}) once`);
  return { nRows, nCols, indptr, cols, values };
}

/** The transpose of a CSR matrix as CSC (Gustavson 1978, "Two fast algorithms for sparse matrices: multiplication and permuted transposition"). */
export function transpose(m: CsrMatrix, shared = false): CscMatrix {
  const nnz = m.values.length;
  const indptr = allocate(Uint32Array, m.nCols + 1, shared);
  for (let p = 0; p < nnz; p++) indptr[m.cols[p] + 1]++;
  for (let c = 0; c < m.nCols; c++) indptr[c + 1] += indptr[c];
  const next = indptr.slice(0, m.nCols);
  const rows = allocate(Uint32Array, nnz, shared);
  const values = allocate(Float64Array, nnz, shared);
  for (let r = 0; r < m.nRows; r++) {
    for (let p = m.indptr[r]; p < m.indptr[r + 1]; p++) {
      const at = next[m.cols[p]]++;
      rows[at] = r;
      values[at] = m.values[p];
    }
  }
  return { nRows: m.nRows, nCols: m.nCols, indptr, rows, values };
}

/** Dense vectors (float32 as stored in vectors.arrow) widened to float64, in shared memory when asked. */
export function denseFromFloat32(data: Float32Array, nRows: number, dim: number, shared = false): DenseMatrix {
  const out = allocate(Float64Array, nRows * dim, shared);
  for (let i = 0; i < data.length; i++) out[i] = data[i];
  return { nRows, dim, data: out };
}
