/** The distance measures kindred offers, by their command-line name. */
export type MeasureName =
  | 'euclidean'
  | 'manhattan'
  | 'cosine'
  | 'kl'
  | 'js'
  | 'jaccard'
  | 'dice'
  | 'overlap'
  | 'matching';

/**
 * One row of a sparse matrix: `indices` strictly ascending, every index below the `dim` passed
 * alongside, `values.length === indices.length`. Stored zeros are allowed and count as zero.
 */
export interface SparseVector {
  indices: Uint32Array;
  values: Float64Array;
}

/**
 * A distance between two weighted vectors: smaller means closer, never NaN for finite input.
 * Formulas, edge-case conventions and sources are in docs/measures.md.
 */
export interface Measure {
  name: MeasureName;
  /** one-line description with formula */
  description: string;
  /** Distance between two dense vectors of equal length. */
  dense(u: Float64Array, v: Float64Array): number;
  /** Distance between two sparse vectors over `dim` dimensions; must equal dense() on the densified vectors. */
  sparse(u: SparseVector, v: SparseVector, dim: number): number;
}
