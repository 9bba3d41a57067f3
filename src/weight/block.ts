import type { Marginals, RowBlock } from './types.js';

/** Number of rows in a block. */
export function blockRowCount(block: RowBlock): number {
  return block.indptr.length - 1;
}

/** Throws (a bug, not a user error) when a block does not fit the marginals it is weighted with. */
export function checkBlockFits(block: RowBlock, m: Marginals): void {
  const nRows = blockRowCount(block);
  if (block.firstRow < 0 || block.firstRow + nRows > m.nRows) {
    throw new Error(`row block [${block.firstRow}, ${block.firstRow + nRows}) lies outside the ${m.nRows} rows of the marginals`);
  }
  if (block.cols.length !== block.values.length || block.indptr[nRows] !== block.values.length) {
    throw new Error(`row block is inconsistent: indptr ends at ${block.indptr[nRows]}, ${block.cols.length} cols, ${block.values.length} values`);
  }
}

/** A block with the same rows and columns as `block` (sharing its indptr and cols) and new values. */
export function withValues(block: RowBlock, values: Float64Array): RowBlock {
  return { firstRow: block.firstRow, indptr: block.indptr, cols: block.cols, values };
}

/**
 * Removes entries whose value is exactly 0, so a weighted block stays sparse.
 * Returns the block itself when it has no such entry.
 */
export function dropZeros(block: RowBlock): RowBlock {
  const { indptr, cols, values } = block;
  let zeros = 0;
  for (let p = 0; p < values.length; p++) if (values[p] === 0) zeros++;
  if (zeros === 0) return block;
  const nRows = blockRowCount(block);
  const outIndptr = new Uint32Array(nRows + 1);
  const outCols = new Uint32Array(values.length - zeros);
  const outValues = new Float64Array(values.length - zeros);
  let q = 0;
  for (let r = 0; r < nRows; r++) {
    for (let p = indptr[r]; p < indptr[r + 1]; p++) {
      const v = values[p];
      if (v === 0) continue;
      outCols[q] = cols[p];
      outValues[q] = v;
      q++;
    }
    outIndptr[r + 1] = q;
  }
  return { firstRow: block.firstRow, indptr: outIndptr, cols: outCols, values: outValues };
}
