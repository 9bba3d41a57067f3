import type { WeightingConfig } from '../config/types.js';

/**
 * A block of consecutive matrix rows in compressed sparse row form.
 * Row r of the block is global row `firstRow + r`; its entries are cols[indptr[r] .. indptr[r+1]), columns ascending.
 */
export interface RowBlock {
  firstRow: number;
  indptr: Uint32Array;
  cols: Uint32Array;
  values: Float64Array;
}

/** Global quantities of the count matrix, combined once before weighting. */
export interface Marginals {
  nRows: number;
  nCols: number;
  /** Σ_c count(w, c) for each row w. */
  rowSums: Float64Array;
  /** Σ_w count(w, c) for each column c. */
  colSums: Float64Array;
  /** Σ_w Σ_c count(w, c). */
  total: number;
  /** Number of nonzero columns of each row (for term × document counts: the document frequency). */
  rowNnz: Uint32Array;
}

/** Every reweighting scheme has this one surface: (counts, marginals, options) -> weighted rows. */
export type WeightingFn = (counts: RowBlock, marginals: Marginals, options: WeightingConfig) => RowBlock;
